import { describe, expect, it } from 'vitest';
import { LineScanner } from '../../../server/jobs/history-scan.ts';

/** Feeds `text` in chunks of `size` bytes, so lines are cut across chunk boundaries. */
function scan(text: string, opts: { fields?: 3 | 4; localOk?: boolean; size?: number } = {}): LineScanner {
  const s = new LineScanner(0x2c, opts.fields ?? 3, opts.localOk ?? true);
  const b = Buffer.from(text);
  const size = opts.size ?? 7;
  for (let o = 0; o < b.length; o += size) s.push(b.subarray(o, o + size));
  s.end();
  return s;
}

describe('LineScanner (the SQL path of the historian import picks its files)', () => {
  it('collects the tag names and the dates their lines name, across chunk boundaries and CRLF', () => {
    const s = scan('tag,ts,value\r\nFIT-101,2026-03-14T23:59:59Z,1\r\nFIT-101,2026-03-15T00:00:00.500Z,2\r\nAIT-111 [g/L],2026-03-15T00:00:00Z,3');
    expect(s.irregular).toBeNull();
    expect(s.lines).toBe(3);
    expect([...s.tags].map(([k, v]) => [k, [...v]])).toEqual([
      ['FIT-101', ['2026-03-14', '2026-03-15']],
      ['AIT-111 [g/L]', ['2026-03-15']],
    ]);
    expect(s.offsets).toBe(false);
  });

  it('notes an offset (its UTC date may differ from the one written)', () => {
    // 00:30+02:00 on the 15th is 22:30Z on the 14th.
    const s = scan('tag,ts,value\nFIT-101,2026-03-15T00:30:00+02:00,1\n');
    expect(s.irregular).toBeNull();
    expect(s.offsets).toBe(true);
  });

  it('leaves to csv-parse a quote anywhere after the header, an empty line, a wrong field count', () => {
    expect(scan('"tag","ts","value"\nA,2026-01-01T00:00:00Z,1\n').irregular).toBeNull();
    expect(scan('tag,ts,value\nA,2026-01-01T00:00:00Z,1\nA,2026-01-01T00:00:01Z,"2"\n').irregular).toBe('line 3: a quote');
    expect(scan('tag,ts,value\nA,2026-01-01T00:00:00Z,1\n\nA,2026-01-01T00:00:01Z,2\n').irregular).toBe('line 3: empty');
    expect(scan('tag,ts,value\nA,2026-01-01T00:00:00Z,1,good\n').irregular).toBe('line 2: not 3 fields');
    expect(scan('tag,ts,value,quality\nA,2026-01-01T00:00:00Z,1\n', { fields: 4 }).irregular).toBe('line 2: not 4 fields');
  });

  it('passes only the strict timestamp and value forms', () => {
    const ok = (ts: string, value = '1', localOk = true) => scan(`tag,ts,value\nA,${ts},${value}\n`, { localOk }).irregular === null;
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
    expect(ok('2026-01-01T00:00:00Z', '')).toBe(true);
    expect(ok('2026-01-01T00:00:00Z', '0x10')).toBe(false);
    expect(ok('2026-01-01T00:00:00Z', 'NaN')).toBe(false);
  });
});
