import { describe, expect, it } from 'vitest';
import { MAX_POINTS } from '../../../shared/contracts/plant-api.ts';
import { chooseResolution, MIN_POINTS } from '../../../server/services/series.service.ts';

const MIN = 60_000;
const H = 3_600_000;
const D = 24 * H;
/** More raw samples than fit (the count is capped at MAX_POINTS + 1). */
const MANY = MAX_POINTS + 1;

// The expected steps are computed by hand from the rule in chooseResolution: the needed step is
// ceil(span_s / 2000); a stored table answers at its own step when that step is ≥ the needed
// one and gives ≥ 500 points (MAX_POINTS / 4), the coarsest such first.
describe('chooseResolution', () => {
  it('raw samples when they fit, counted and expected', () => {
    // 1 h at a 2 s period: 1800 expected, 1800 counted.
    expect(chooseResolution(H, 2, undefined, 1800)).toEqual({ resolution: 'raw', step_s: null });
    // 3600 expected at 1 s: bucketed by 2 s from raw (1 h / 60 s = 60 minute points < 500).
    expect(chooseResolution(H, 1, undefined, MANY)).toEqual({ resolution: 'raw', step_s: 2 });
  });

  it('rollup_1m at 60 s once the minutes give ≥ 500 points and ≤ 2000 (500 min … 2000 min)', () => {
    // 499 min of 1 s samples: 499 minute points < 500, so raw buckets of ceil(29 940 / 2000) = 15 s.
    expect(chooseResolution(499 * MIN, 1, undefined, MANY)).toEqual({ resolution: 'raw', step_s: 15 });
    expect(chooseResolution(500 * MIN, 1, undefined, MANY)).toEqual({ resolution: '1m', step_s: 60 });
    expect(chooseResolution(24 * H, 1, undefined, MANY)).toEqual({ resolution: '1m', step_s: 60 }); // 1440 points
    expect(chooseResolution(2000 * MIN, 1, undefined, MANY)).toEqual({ resolution: '1m', step_s: 60 });
    // 2001 min: needed step ceil(120 060 / 2000) = 61 s → multiples of 60 s: 120 s.
    expect(chooseResolution(2001 * MIN, 1, undefined, MANY)).toEqual({ resolution: '1m', step_s: 120 });
  });

  it('rollup_1h at 3600 s once the hours give ≥ 500 points and ≤ 2000 (500 h … 2000 h)', () => {
    // 499 h: needed ceil(1 796 400 / 2000) = 899 s → 900 s from rollup_1m.
    expect(chooseResolution(499 * H, 1, undefined, MANY)).toEqual({ resolution: '1m', step_s: 900 });
    expect(chooseResolution(500 * H, 1, undefined, MANY)).toEqual({ resolution: '1h', step_s: 3600 });
    expect(chooseResolution(30 * D, 1, undefined, MANY)).toEqual({ resolution: '1h', step_s: 3600 }); // 720 points
    expect(chooseResolution(2000 * H, 1, undefined, MANY)).toEqual({ resolution: '1h', step_s: 3600 });
    // A year: needed ceil(31 536 000 / 2000) = 15 768 s (4.38 h); the first width that divides a
    // day and is wide enough is 6 h = 21 600 s (1460 points; 5 h would drift across the days).
    expect(chooseResolution(365 * D, 1, undefined, MANY)).toEqual({ resolution: '1h', step_s: 21_600 });
    // Past 2000 days: whole days (ceil(6 000 d × 86 400 / 2000) = 259 200 s = 3 d).
    expect(chooseResolution(6000 * D, 1, undefined, MANY)).toEqual({ resolution: '1h', step_s: 3 * 86_400 });
  });

  it('never more than MAX_POINTS and, from a stored table at its own step, never fewer than MIN_POINTS', () => {
    for (let span = 10 * MIN; span <= 400 * D; span = Math.round(span * 1.07)) {
      const c = chooseResolution(span, 1, undefined, MANY);
      const points = span / 1000 / c.step_s!;
      expect(points, `${span} ms`).toBeLessThanOrEqual(MAX_POINTS);
      if (c.resolution !== 'raw' && (c.step_s === 60 || c.step_s === 3600)) expect(points, `${span} ms`).toBeGreaterThanOrEqual(MIN_POINTS);
    }
  });

  it('a step the service picks divides the day, so buckets start at the same times every day', () => {
    for (let span = 10 * MIN; span <= 3000 * D; span = Math.round(span * 1.07)) {
      const { step_s } = chooseResolution(span, 1, undefined, MANY);
      const s = step_s!;
      expect(s <= 86_400 ? 86_400 % s : s % 86_400, `${span} ms → ${s} s`).toBe(0);
    }
  });

  it('an asked step is kept (rounded up to what its resolution allows), never coarsened', () => {
    expect(chooseResolution(30 * D, 1, 60, MANY)).toEqual({ resolution: '1m', step_s: 1320 }); // raised to keep ≤ 2000
    expect(chooseResolution(24 * H, 1, 50, MANY)).toEqual({ resolution: 'raw', step_s: 50 });
    expect(chooseResolution(H, 1, 90, MANY)).toEqual({ resolution: '1m', step_s: 120 });
    expect(chooseResolution(H, 1, 3600, MANY)).toEqual({ resolution: '1h', step_s: 3600 });
  });
});
