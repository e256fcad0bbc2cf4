import { describe, expect, it } from 'vitest';
import { csvHeaderProblem, neutraliseText, parseCsv, parseCsvUpload, toCsv } from '../../../server/services/csv.service.ts';

// RFC 4180 (Common Format and MIME Type for CSV Files), §2 rules 1–7; OWASP "CSV Injection"
// (the leading characters = + - @ tab CR, neutralised with a single quote).

// The synchronous parser and the chunked upload parser answer the same.
const parsers = { parseCsv: async (t: string) => parseCsv(t), parseCsvUpload };

describe.each(Object.entries(parsers))('CSV parsing with csv-parse: %s', (_name, parse) => {
  it('CRLF and LF (mixed), a byte-order mark, blank lines, quoted commas, quotes and line breaks; each record with the line it starts on', async () => {
    const r = await parse('\ufeffa,b\r\n1,2\r\n\r\n"x\ny","say ""hi"", then"\n4,5\n');
    expect(r).toEqual({
      ok: true,
      records: [
        { line: 1, fields: ['a', 'b'] },
        { line: 2, fields: ['1', '2'] },
        { line: 4, fields: ['x\ny', 'say "hi", then'] },
        { line: 6, fields: ['4', '5'] },
      ],
    });
  });

  it('records of other lengths pass through (the caller names the line); a file without a final line end is complete', async () => {
    expect(await parse('a,b,c\n1,2\n3,4,5,6')).toEqual({ ok: true, records: [{ line: 1, fields: ['a', 'b', 'c'] }, { line: 2, fields: ['1', '2'] }, { line: 3, fields: ['3', '4', '5', '6'] }] });
  });

  it('malformed quoting is an error with its line (RFC 4180 §2 rule 5), returned, not thrown', async () => {
    expect(await parse('kind,sampledAt,note\nSVI,2025-03-03T07:30:00Z,"open\n')).toEqual({ ok: false, line: 2, message: 'a quoted field is not closed' });
    // The unclosed field starts on line 3 and runs to the end of the file: the start is reported.
    expect(await parse('a,b\n1,2\n3,"open\nmore\nlines\n')).toMatchObject({ ok: false, line: 3 });
    expect(await parse('a,b\n1,x"y\n')).toEqual({ ok: false, line: 2, message: 'a quote inside an unquoted field (RFC 4180 §2 rule 5)' });
    expect(await parse('a,b\n"x"y,1\n')).toEqual({ ok: false, line: 2, message: 'text after a closing quote (RFC 4180 §2 rule 5)' });
  });

  it('a file larger than one 16 KiB chunk, with two-byte characters across the chunk boundaries, comes back whole', async () => {
    const rows = Array.from({ length: 3000 }, (_, i) => `${i},"µ${'é'.repeat(i % 7)}, ok"`);
    const text = `n,note\r\n${rows.join('\r\n')}\r\n`;
    expect(Buffer.byteLength(text)).toBeGreaterThan(3 * 16 * 1024);
    const r = await parse(text);
    expect(r.ok).toBe(true);
    if (!r.ok) return;
    expect(r.records).toHaveLength(3001);
    r.records.slice(1).forEach((rec, i) => expect(rec).toEqual({ line: i + 2, fields: [String(i), `µ${'é'.repeat(i % 7)}, ok`] }));
  });
});

describe('CSV upload width cap', () => {
  it('a header wider than the cap is refused on line 1 before parsing; one at the cap parses', async () => {
    const cols = (n: number) => Array.from({ length: n }, (_, i) => `c${i}`).join(',');
    expect(await parseCsvUpload(`${cols(40_000)}\r\nSVI\r\n`)).toEqual({ ok: false, line: 1, message: 'the header row has more than 1000 columns; no upload has that many' });
    const atCap = await parseCsvUpload(`${cols(1000)}\r\n1\r\n`);
    expect(atCap.ok && atCap.records[0]!.fields).toHaveLength(1000);
  });
});

describe('CSV header check', () => {
  const allowed = ['kind', 'sampledAt', 'value', 'note'];
  it('names unknown, duplicate and missing columns once each', () => {
    const h = csvHeaderProblem(['kind', 'when', 'kind', 'when', 'note'], allowed, ['kind', 'sampledAt']);
    expect(h).toEqual({ unknown: ['when'], duplicate: ['kind', 'when'], missing: ['sampledAt'], message: 'unknown column(s) when; duplicate column(s) kind, when; missing column(s) sampledAt' });
    expect(csvHeaderProblem(['note', 'kind', 'sampledAt'], allowed, ['kind', 'sampledAt']).message).toBeNull();
  });

  it('a 40 000-column header is checked in one pass: every column looked up a bounded number of times, the answer bounded', () => {
    // 20 000 distinct unknown names, each twice: 40 000 columns (the header that took 3.6 s with the indexOf scan).
    const cols = Array.from({ length: 40_000 }, (_, i) => `c${i % 20_000}`);
    // Count how often the check reads the column list: a quadratic scan reads it ~n² times.
    let reads = 0;
    const counted = new Proxy(cols, {
      get(target, prop, recv) {
        if (typeof prop === 'string' && /^\d+$/.test(prop)) reads++;
        return Reflect.get(target, prop, recv);
      },
    });
    const h = csvHeaderProblem(counted, allowed, ['kind']);
    expect(reads).toBeLessThanOrEqual(cols.length);
    expect(h.unknown).toHaveLength(20_000);
    expect(h.duplicate).toHaveLength(20_000);
    expect(h.missing).toEqual(['kind']);
    expect(h.message).toMatch(/^unknown column\(s\) c0, c1, .*, c19 and 19980 more; duplicate column\(s\) c0, .* and 19980 more; missing column\(s\) kind$/);
    expect(h.message!.length).toBeLessThan(1000);
  });
});

describe('CSV export: formula cells neutralised (OWASP CSV Injection), numbers kept', () => {
  it('a text cell starting with = + - @ tab or CR gets a leading single quote; other text is unchanged', () => {
    expect(neutraliseText('=HYPERLINK("http://x.invalid","click")')).toBe('\'=HYPERLINK("http://x.invalid","click")');
    for (const s of ['+1', '-1+2', '@SUM(A1)', '\tx', '\rx']) expect(neutraliseText(s)).toBe(`'${s}`);
    for (const s of ['RAS flow', '1e3', 'a=b', '', "'already"]) expect(neutraliseText(s)).toBe(s);
  });

  it('toCsv: the description is neutralised (and quoted for its comma and quotes), a negative number stays a number', async () => {
    const csv = toCsv(['name', 'value', 'description'], [['FIT-111', -0.5, '=HYPERLINK("http://x.invalid","a,b")'], ['LIT-211', -12, '-5 m offset']]);
    expect(csv).toBe('name,value,description\r\nFIT-111,-0.5,"\'=HYPERLINK(""http://x.invalid"",""a,b"")"\r\nLIT-211,-12,\'-5 m offset\r\n');
    const back = parseCsv(csv);
    expect(back.ok && back.records.map((r) => r.fields[1])).toEqual(['value', '-0.5', '-12']);
    expect(back.ok && Number(back.records[1]!.fields[1])).toBe(-0.5);
  });
});
