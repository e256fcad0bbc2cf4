import { describe, expect, it } from 'vitest';
import { LineScanner, readValue, type ScanTag } from '../../../server/jobs/history-scan.ts';
import { mulberry32 } from '../domain/prng.ts';

/** FIT-101 in m³/h (range 0–5000); `AIT-111 [mg/L]` converted to g/L (× 0.001, range 0–10); anything else unknown. */
function resolve(text: string): ScanTag | string {
  if (text === 'FIT-101' || text === 'A') return { tagId: 7, factor: 1, rangeLow: 0, rangeHigh: 5000 };
  if (text === 'AIT-111 [mg/L]') return { tagId: 9, factor: 0.001, rangeLow: 0, rangeHigh: 10 };
  return `unknown tag "${text}"`;
}

/** Feeds `text` in chunks of `size` bytes, so lines are cut across chunk boundaries; the scanner and the COPY rows it wrote. */
function scan(text: string, opts: { fields?: 3 | 4; localOk?: boolean; size?: number } = {}): { s: LineScanner; rows: string } {
  const s = new LineScanner(0x2c, opts.fields ?? 3, opts.localOk ?? true, resolve);
  const b = Buffer.from(text);
  const size = opts.size ?? 7;
  let rows = '';
  for (let o = 0; o < b.length; o += size) rows += s.push(b.subarray(o, o + size)).toString('latin1');
  rows += s.end().toString('latin1');
  return { s, rows };
}

describe('LineScanner (the SQL path of the historian import picks its files and types their rows)', () => {
  it('writes typed COPY rows across chunk boundaries and CRLF: tag id, timestamp text, value, quality code', () => {
    const { s, rows } = scan('tag,ts,value\r\nFIT-101,2026-03-14T23:59:59Z,1\r\nFIT-101,2026-03-15T00:00:00.500Z,2.5e3\r\nAIT-111 [mg/L],2026-03-15T00:00:00+01:00,3');
    expect(s.irregular).toBeNull();
    expect(s.lines).toBe(3);
    // 3 mg/L × 0.001 = 0.003 g/L, written as JavaScript's shortest round-trip form.
    expect(rows).toBe('7\t2026-03-14T23:59:59Z\t1\t0\n7\t2026-03-15T00:00:00.500Z\t2.5e3\t0\n9\t2026-03-15T00:00:00+01:00\t0.003\t0\n');
  });

  it('quality words and codes, an empty value with quality bad, and the out-of-range flag as the line checks set them', () => {
    const { s, rows } = scan('tag,ts,value,quality\nA,2026-01-01T00:00:00Z,1,Uncertain\nA,2026-01-01T00:00:01Z,,bad\nA,2026-01-01T00:00:02Z,6000,\nA,2026-01-01T00:00:03Z,-1,192\n', { fields: 4, size: 5 });
    expect(s.irregular).toBeNull();
    // uncertain = 1 | sourceStatus 4; bad = 2 | 4; 6000 above 5000: uncertain 1 | outOfRange 8; −1 below 0 with code 192: 192 | 8 | 1.
    expect(rows).toBe('7\t2026-01-01T00:00:00Z\t1\t5\n7\t2026-01-01T00:00:01Z\t\\N\t6\n7\t2026-01-01T00:00:02Z\t6000\t9\n7\t2026-01-01T00:00:03Z\t-1\t201\n');
  });

  it('leaves to csv-parse a quote anywhere after the header, an empty line, a wrong field count, an unknown tag', () => {
    expect(scan('"tag","ts","value"\nA,2026-01-01T00:00:00Z,1\n').s.irregular).toBeNull();
    expect(scan('tag,ts,value\nA,2026-01-01T00:00:00Z,1\nA,2026-01-01T00:00:01Z,"2"\n').s.irregular).toBe('line 3: a quote');
    expect(scan('tag,ts,value\nA,2026-01-01T00:00:00Z,1\n\nA,2026-01-01T00:00:01Z,2\n').s.irregular).toBe('line 3: empty');
    expect(scan('tag,ts,value\nA,2026-01-01T00:00:00Z,1,good\n').s.irregular).toBe('line 2: not 3 fields');
    expect(scan('tag,ts,value,quality\nA,2026-01-01T00:00:00Z,1\n', { fields: 4 }).s.irregular).toBe('line 2: not 4 fields');
    expect(scan('tag,ts,value\nA,2026-01-01T00:00:00Z,1\nB,2026-01-01T00:00:00Z,1\n').s.irregular).toBe('line 3: unknown tag "B"');
  });

  it('passes only the strict timestamp, value and quality forms', () => {
    const ok = (ts: string, value = '1', localOk = true) => scan(`tag,ts,value\nA,${ts},${value}\n`, { localOk }).s.irregular === null;
    const q = (quality: string, value = '1') => scan(`tag,ts,value,quality\nA,2026-01-01T00:00:00Z,${value},${quality}\n`, { fields: 4 }).s.irregular === null;
    expect(ok('2026-01-01T00:00:00Z')).toBe(true);
    expect(ok('2026-01-01T00:00:00.123-05:00')).toBe(true);
    expect(ok('2026-01-01 00:00:00')).toBe(true);
    // Local times only when the import's zone is UTC (elsewhere the zone's rules are RowChecker's).
    expect(ok('2026-01-01 00:00:00', '1', false)).toBe(false);
    expect(ok('2026-01-01 00:00:00Z')).toBe(false);
    expect(ok('2026-01-01T~0:00:00Z')).toBe(false);
    expect(ok('2026-01-01T00:00:60Z')).toBe(false);
    expect(ok('0050-01-01T00:00:00Z')).toBe(false);
    expect(ok('2026-01-01T00:00:00.5Z')).toBe(false);
    expect(ok('2026-01-01T00:00:00+0100')).toBe(false);
    expect(ok('2026-01-01T00:00:00Z', '-1.5e+3')).toBe(true);
    // Empty only with quality bad (RowChecker refuses it otherwise).
    expect(ok('2026-01-01T00:00:00Z', '')).toBe(false);
    expect(q('BAD', '')).toBe(true);
    expect(ok('2026-01-01T00:00:00Z', '0x10')).toBe(false);
    expect(ok('2026-01-01T00:00:00Z', 'NaN')).toBe(false);
    expect(ok('2026-01-01T00:00:00Z', '1-2')).toBe(false);
    expect(ok('2026-01-01T00:00:00Z', '1e999')).toBe(false);
    expect(q('32767')).toBe(true);
    expect(q('32768')).toBe(false);
    expect(q('gOOd')).toBe(false);
    expect(q('-1')).toBe(false);
  });

  it('reads values as Number() does, to the bit (the fast decimal path and its fallback)', () => {
    const rnd = mulberry32(7);
    const texts = ['0', '-0', '+.5', '5.', '.', '-', '1.2.3', '1e5', '-1.5E-3', '4999.99999999999', '5000.000000000001', '123456789012345', '1234567890123456', '0.1', '0.3', '9007199254740993'];
    for (let k = 0; k < 20_000; k++) {
      const int = String(Math.floor(rnd() * 10 ** Math.floor(rnd() * 12)));
      const frac = String(Math.floor(rnd() * 10 ** Math.floor(rnd() * 10))).padStart(Math.floor(rnd() * 6), '0');
      texts.push(`${rnd() < 0.3 ? '-' : ''}${int}${rnd() < 0.8 ? `.${frac}` : ''}`);
    }
    for (const t of texts) expect(Object.is(readValue(Buffer.from(t), 0, t.length), Number(t)), t).toBe(true);
  });
});
