/**
 * Minute series of the balance: rollup_1m means keyed by bucket time (epoch ms), in base units.
 * The helpers combine series bucket by bucket — a bucket missing from any input is missing from
 * the result, never filled with zero — and turn them into the time series the SRT methods take.
 */
import { qualityGrade } from '../../contracts/sample-quality.js';
import type { TimeSeries } from '../srt.js';
import type { SeriesPoint } from './inputs.js';

/** Bucket time (epoch ms) → value in base units. */
export type MinuteSeries = ReadonlyMap<number, number>;

/**
 * The buckets of a tag within [from_ms, to_ms] scaled to base units by `factor`; buckets graded
 * bad (shared/contracts/sample-quality.ts) or with a non-finite mean are left out.
 */
export function seriesInBaseUnit(points: readonly SeriesPoint[], factor: number, from_ms: number, to_ms: number): MinuteSeries {
  const out = new Map<number, number>();
  for (const p of points) {
    if (p.t_ms < from_ms || p.t_ms > to_ms || qualityGrade(p.qualityCode) === 'bad' || !Number.isFinite(p.mean)) continue;
    out.set(p.t_ms, p.mean * factor);
  }
  return out;
}

/** Buckets present in every series, combined by `fn` (values in the order of `series`). */
export function joinSeries(series: readonly MinuteSeries[], fn: (values: number[]) => number): MinuteSeries {
  const out = new Map<number, number>();
  if (series.length === 0) return out;
  for (const t of series[0]!.keys()) {
    const vs = series.map((m) => m.get(t));
    if (vs.every((v) => v !== undefined)) out.set(t, fn(vs as number[]));
  }
  return out;
}

/** Bucket-wise sum over the buckets present in every series. */
export function sumSeries(series: readonly MinuteSeries[]): MinuteSeries {
  return joinSeries(series, (v) => v.reduce((a, b) => a + b, 0));
}

/** Bucket-wise arithmetic mean over the buckets present in every series. */
export function meanSeries(series: readonly MinuteSeries[]): MinuteSeries {
  return joinSeries(series, (v) => v.reduce((a, b) => a + b, 0) / v.length);
}

/** Bucket-wise Σ wᵢ·xᵢ (e.g. basin MLSS × basin volume = aeration mass). */
export function weightedSumSeries(series: readonly MinuteSeries[], weights: readonly number[]): MinuteSeries {
  return joinSeries(series, (v) => v.reduce((acc, vi, i) => acc + vi * weights[i]!, 0));
}

/** A minute series as a time-sorted {@link TimeSeries} (the input of shared/domain/srt.ts). */
export function toTimeSeries(s: MinuteSeries): TimeSeries {
  return [...s].map(([ts_ms, value]) => ({ ts_ms, value })).sort((a, b) => a.ts_ms - b.ts_ms);
}

/** Mean of the bucket values, or null for an empty series. */
export function seriesMean(s: MinuteSeries): number | null {
  if (s.size === 0) return null;
  let sum = 0;
  for (const v of s.values()) sum += v;
  return sum / s.size;
}

/**
 * Ordinary least-squares slope of the series against time [value unit per hour] (e.g. Press et
 * al., Numerical Recipes, 3rd ed. 2007, §15.2); null with fewer than 3 buckets or no time spread.
 */
export function slopePerHour(s: MinuteSeries): number | null {
  const pts = [...s].sort((a, b) => a[0] - b[0]);
  if (pts.length < 3) return null;
  const t0 = pts[0]![0];
  const xs = pts.map(([t]) => (t - t0) / 3_600_000);
  const mx = xs.reduce((a, b) => a + b, 0) / xs.length;
  const my = pts.reduce((a, [, v]) => a + v, 0) / pts.length;
  let num = 0;
  let den = 0;
  for (let i = 0; i < pts.length; i++) {
    num += (xs[i]! - mx) * (pts[i]![1] - my);
    den += (xs[i]! - mx) ** 2;
  }
  return den > 0 ? num / den : null;
}
