import { describe, expect, it } from 'vitest';
import { RowChecker, splitUnit, timestampParser, type ImportTag } from '../../../server/jobs/history-rows.ts';
import type { Sample } from '../../../ingest/pipeline/types.ts';

const tags: ImportTag[] = [
  { id: 1, name: 'FIT-101', unit: 'm3/h', rangeLow: 0, rangeHigh: 5000 },
  { id: 2, name: 'AIT-231', unit: 'mg/L', rangeLow: 0, rangeHigh: 500 },
];
const opts = { layout: 'auto' as const, tsFormat: 'iso', timezone: 'UTC' };

describe('historian import line checks', () => {
  it('timestamps: ISO with offset, ISO local in a zone, patterns, epoch', () => {
    expect(timestampParser('iso', 'UTC')('2026-03-01T12:00:00+01:00')).toBe(Date.UTC(2026, 2, 1, 11));
    // America/New_York in January is UTC−5 (EST) and in July UTC−4 (EDT): IANA tz database.
    expect(timestampParser('iso', 'America/New_York')('2026-01-15 08:30')).toBe(Date.UTC(2026, 0, 15, 13, 30));
    expect(timestampParser('iso', 'America/New_York')('2026-07-15T08:30:00')).toBe(Date.UTC(2026, 6, 15, 12, 30));
    expect(timestampParser('MM/DD/YYYY HH:mm:ss', 'UTC')('07/04/2026 23:59:58')).toBe(Date.UTC(2026, 6, 4, 23, 59, 58));
    expect(timestampParser('DD.MM.YYYY HH:mm:ss.SSS', 'Europe/Berlin')('01.07.2026 02:00:00.250')).toBe(Date.UTC(2026, 6, 1, 0, 0, 0, 250));
    expect(timestampParser('epoch_s', 'UTC')('1700000000.5')).toBe(1_700_000_000_500);
    expect(timestampParser('iso', 'UTC')('2026-02-31T00:00:00')).toBeNull();
    expect(timestampParser('iso', 'UTC')('yesterday')).toBeNull();
  });

  it('units in the header are converted to the tag unit (NIST SP 811 B.9: US gallon = 231 in³ = 3.785411784e-3 m³ exactly, rounded there to 3.785412e-3)', () => {
    expect(splitUnit('FIT-101 [gpm]')).toEqual({ name: 'FIT-101', unit: 'gpm' });
    const c = new RowChecker(tags, opts);
    expect(c.header(['ts', 'FIT-101 [gpm]', 'AIT-231 [g/L]'])).toBe(true);
    const out: Sample[] = [];
    c.row(['2026-01-01T00:00:00Z', '100', '0.012'], 2, out);
    // 100 gpm × 3.785411784e-3 m³ × 60 min/h = 22.7124707 m³/h; 0.012 g/L = 12 mg/L.
    expect(out[0]!.value).toBeCloseTo(22.712470704, 9);
    expect(out[1]!.value).toBeCloseTo(12, 9);
  });

  it('a unit of another dimension or an unknown tag fails the header', () => {
    const c = new RowChecker(tags, opts);
    expect(c.header(['ts', 'FIT-101 [mg/L]', 'XX-1'])).toBe(false);
    expect(c.errors.map((e) => e.field)).toEqual(['FIT-101 [mg/L]', 'XX-1']);
  });

  it('long layout: bad numbers refused with their line, out of range kept and flagged, bad quality without a value allowed', () => {
    const c = new RowChecker(tags, opts);
    expect(c.header(['tag', 'ts', 'value', 'quality'])).toBe(true);
    const out: Sample[] = [];
    c.row(['FIT-101', '2026-01-01T00:00:00Z', '0x10', 'good'], 2, out);
    c.row(['FIT-101', '2026-01-01T00:00:10Z', '6000', 'good'], 3, out);
    c.row(['FIT-101', '2026-01-01T00:00:20Z', '', 'bad'], 4, out);
    expect(c.rejected).toBe(1);
    expect(c.errors).toEqual([{ line: 2, field: 'value', message: '"0x10" is not a number' }]);
    // 6000 > rangeHigh 5000: uncertain (1) with the outOfRange flag (1 << 3), shared/contracts/sample-quality.ts.
    expect(out[0]).toMatchObject({ value: 6000, quality: 1 | 8 });
    expect(out[1]).toMatchObject({ value: null, quality: 2 | 4 });
  });
});
