import type { SamplePoint } from '../../../shared/contracts/plant-api.ts';

/** A run of connected points drawn with one stroke; `dashed` when a point of it is not good. */
export interface Run {
  pts: { t: number; v: number }[];
  dashed: boolean;
}

export interface Shape {
  runs: Run[];
  /** Time spans [ms] with no data longer than the gap limit (drawn as "no data", never bridged). */
  gaps: [number, number][];
  /** Points graded bad or uncertain, for markers. */
  marks: { t: number; v: number; quality: 'uncertain' | 'bad' }[];
  /** Min–max envelope of bucketed points (rollups), per connected run. */
  bands: { t: number; lo: number; hi: number }[][];
}

/**
 * Cuts a series into drawable runs: consecutive points further apart than `gapMs` (about twice
 * the step) are not joined, so a missing stretch shows as a break instead of an interpolated
 * line; a pair of points touching an uncertain or bad point is drawn dashed, and those points
 * get a marker. `windowMs` bounds the leading/trailing gaps (trailing only up to `nowMs`).
 */
export function shapeSeries(points: SamplePoint[], gapMs: number, windowMs: [number, number], nowMs: number): Shape {
  const runs: Run[] = [];
  const gaps: [number, number][] = [];
  const marks: Shape['marks'] = [];
  const bands: Shape['bands'] = [];
  let prev: { t: number; v: number; good: boolean } | null = null;
  let run: Run | null = null;
  let band: { t: number; lo: number; hi: number }[] | null = null;
  for (const p of points) {
    if (p.value === null) continue;
    const t = Date.parse(p.ts);
    const v = p.value;
    const good = p.quality === 'good';
    if (!good) marks.push({ t, v, quality: p.quality as 'uncertain' | 'bad' });
    const broken = !prev || t - prev.t > gapMs;
    if (broken) {
      if (!prev) {
        if (t - windowMs[0] > gapMs) gaps.push([windowMs[0], t]);
      } else gaps.push([prev.t, t]);
      run = { pts: [{ t, v }], dashed: !good };
      runs.push(run);
      band = null;
    } else {
      const dashed = !good || !prev!.good;
      if (run!.pts.length === 1) run!.dashed = dashed;
      else if (run!.dashed !== dashed) {
        run = { pts: [{ t: prev!.t, v: prev!.v }], dashed };
        runs.push(run);
      }
      run!.pts.push({ t, v });
    }
    if (p.min !== undefined && p.max !== undefined) {
      if (!band) bands.push((band = []));
      band.push({ t, lo: p.min, hi: p.max });
    }
    prev = { t, v, good };
  }
  const end = Math.min(windowMs[1], nowMs);
  if (!prev) gaps.push([windowMs[0], end]);
  else if (end - prev.t > gapMs) gaps.push([prev.t, end]);
  return { runs, gaps, marks, bands };
}

/** Gap limit [ms]: twice the bucket width, or for raw samples twice the tag's expected period. */
export function gapLimitMs(step_s: number | null, expectedPeriod_s: number | undefined, points: SamplePoint[]): number {
  if (step_s) return 2 * step_s * 1000;
  if (expectedPeriod_s && expectedPeriod_s > 0) return 2 * expectedPeriod_s * 1000;
  const dts: number[] = [];
  for (let i = 1; i < points.length; i++) dts.push(Date.parse(points[i]!.ts) - Date.parse(points[i - 1]!.ts));
  dts.sort((a, b) => a - b);
  return 2 * (dts[Math.floor(dts.length / 2)] ?? 60_000);
}
