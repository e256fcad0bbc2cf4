import { describe, expect, it } from 'vitest';
import { unpackBuckets } from '../../../server/repositories/series.repository.ts';

/**
 * The packed bucket records (server/repositories/series.repository.ts): fields as 8-byte
 * big-endian IEEE 754 doubles, the layout PostgreSQL's float8send writes (network byte order).
 * The bytes here are written with Buffer.writeDoubleBE, independently of the decoder.
 */
function pack(records: number[][]): Buffer {
  const b = Buffer.alloc(records.reduce((n, r) => n + 8 * r.length, 0));
  let o = 0;
  for (const r of records) for (const v of r) o = b.writeDoubleBE(v, o);
  return b;
}

describe('unpackBuckets', () => {
  const t = Date.parse('2026-06-30T18:00:00Z');
  // [ts_ms, mean, min, max, count, quality(, last)]
  const a = [t, 1 / 3, -0, 5e-324, 2 ** 53, 37];
  const b = [t + 21_600_000, 0.1 + 0.2, -1.7976931348623157e308, 1e21, 1, 0];

  it('reads every field to the bit, in the BucketRow order, with the ISO text of its time', () => {
    const rows = unpackBuckets(2, pack([a, b]), false);
    expect(rows).toEqual([
      ['2026-06-30T18:00:00.000Z', t, 1 / 3, -0, 5e-324, 2 ** 53, null, 37],
      ['2026-07-01T00:00:00.000Z', t + 21_600_000, 0.30000000000000004, -1.7976931348623157e308, 1e21, 1, null, 0],
    ]);
    expect(Object.is(rows[0]![3], -0)).toBe(true);
  });

  it('reads `last` after the quality when it was asked for', () => {
    const rows = unpackBuckets(1, pack([[...a, 2.5]]), true);
    expect(rows[0]![6]).toBe(2.5);
    expect(rows[0]![7]).toBe(37);
  });

  it('an empty answer is no rows (string_agg of nothing is NULL)', () => {
    expect(unpackBuckets(0, null, false)).toEqual([]);
  });

  it('refuses bytes that do not match the record count (a NULL field drops its record from string_agg)', () => {
    expect(() => unpackBuckets(2, pack([a]), false)).toThrow(/48 bytes for 2 records of 48/);
    expect(() => unpackBuckets(1, pack([a]), true)).toThrow(/of 56/);
    expect(() => unpackBuckets(1, null, false)).toThrow(/0 bytes for 1 records/);
  });
});
