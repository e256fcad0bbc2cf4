import { describe, expect, it } from 'vitest';
import { joinSeries, meanSeries, seriesInBaseUnit, seriesMean, slopePerHour, sumSeries, toTimeSeries, weightedSumSeries } from '../../../shared/domain/balance/series.js';

const M = 60_000;
const s = (...pairs: [number, number][]) => new Map(pairs.map(([m, v]) => [m * M, v]));

describe('minute series helpers (bucket-wise; a bucket missing anywhere is missing in the result)', () => {
  it('join, sum, mean and weighted sum only where every series has the bucket', () => {
    const a = s([0, 1], [1, 2], [2, 3]);
    const b = s([0, 10], [2, 30]);
    expect([...sumSeries([a, b])]).toEqual([[0, 11], [2 * M, 33]]);
    expect([...meanSeries([a, b])]).toEqual([[0, 5.5], [2 * M, 16.5]]);
    // basin masses: 3 g/L × 6000 m³ + 2 g/L × 3000 m³ = 24 000 kg
    expect([...weightedSumSeries([s([0, 3]), s([0, 2])], [6000, 3000])]).toEqual([[0, 24_000]]);
    expect([...joinSeries([a, b], ([x, y]) => y! - x!)]).toEqual([[0, 9], [2 * M, 27]]);
    expect(sumSeries([]).size).toBe(0);
  });
  it('seriesInBaseUnit keeps the window, scales, drops bad buckets (quality code 2) and non-finite means', () => {
    const pts = [
      { t_ms: 0, mean: 10, qualityCode: 0 },
      { t_ms: M, mean: 12, qualityCode: 2 },
      { t_ms: 2 * M, mean: Number.NaN, qualityCode: 0 },
      { t_ms: 3 * M, mean: 14, qualityCode: 1 },
      { t_ms: 4 * M, mean: 16, qualityCode: 0 },
    ];
    expect([...seriesInBaseUnit(pts, 1e-3, 0, 3 * M)]).toEqual([[0, 0.01], [3 * M, 0.014]]);
  });
  it('least-squares slope: levels 1.0, 1.1, 1.2 m at 0, 30, 60 min rise 0.2 m/h; fewer than 3 points give none', () => {
    expect(slopePerHour(s([60, 1.2], [0, 1.0], [30, 1.1]))).toBeCloseTo(0.2, 12);
    expect(slopePerHour(s([0, 1], [1, 2]))).toBeNull();
  });
  it('mean and time series', () => {
    expect(seriesMean(s([0, 700], [1, 900]))).toBe(800);
    expect(seriesMean(new Map())).toBeNull();
    expect(toTimeSeries(s([2, 5], [1, 4]))).toEqual([{ ts_ms: M, value: 4 }, { ts_ms: 2 * M, value: 5 }]);
  });
});
