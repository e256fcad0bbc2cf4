import { describe, expect, it } from 'vitest';
import { rasConcMaxFlux_gL } from '../../../shared/domain/flux.js';
import { operatingSettlingFit, stableBlanketReadings, type BlanketReading } from '../../../shared/domain/settling-fit.js';
import { mulberry32, uniform } from './prng.js';

/** Standard normal deviate by Box–Muller (Box & Muller 1958, Ann. Math. Stat. 29:610). */
function normal(rnd: () => number): number {
  return Math.sqrt(-2 * Math.log(1 - rnd())) * Math.cos(2 * Math.PI * rnd());
}

/**
 * Stable-blanket periods of a sludge with known Vesilind v0 = 6 m/h, k = 0.5 L/g: each period's
 * X_R is the maximum underflow concentration G_L/u of solids-flux theory (Keinath et al. 1977,
 * computed by flux.ts, itself checked against the published closed form), with log-normal noise.
 */
const TRUTH = { v0_mh: 6, k_Lg: 0.5 };
function readings(seed: number, n: number, sd: number): BlanketReading[] {
  const rnd = mulberry32(seed);
  return Array.from({ length: n }, (_, i) => {
    const u = uniform(rnd, 0.2, 0.6);
    return { t_ms: Date.UTC(2026, 10, 1) + i * 3_600_000, underflowRate_mh: u, underflowTss_gL: rasConcMaxFlux_gL(u, TRUTH).value! * Math.exp(sd * normal(rnd)) };
  });
}

describe('operatingSettlingFit: Vesilind v0 and k from stable-blanket periods at the limiting flux', () => {
  it('recovers v0 and k exactly from noise-free readings, with their number and date range', () => {
    const r = readings(1, 8, 0);
    const f = operatingSettlingFit(r);
    expect(f.fit.quality).toBe('estimated'); // always: critical loading is assumed
    expect(f.fit.value!.v0_mh).toBeCloseTo(6, 6);
    expect(f.fit.value!.k_Lg).toBeCloseTo(0.5, 8);
    expect(f.n).toBe(8);
    expect([f.from_ms, f.to_ms]).toEqual([r[0]!.t_ms, r[7]!.t_ms]);
  });

  it('seed 16, 30 periods, 3 % noise on X_R: |k̂ − k| ≤ 2·se(k) and |ln v̂0 − ln v0| ≤ 2·se(ln v0), and the uncertainty is not vacuous', () => {
    const f = operatingSettlingFit(readings(16, 30, 0.03)).fit.value!;
    expect(Math.abs(f.k_Lg - TRUTH.k_Lg)).toBeLessThanOrEqual(2 * f.kStdErr_Lg!);
    expect(Math.abs(Math.log(f.v0_mh / TRUTH.v0_mh))).toBeLessThanOrEqual(2 * f.lnV0StdErr!);
    expect(f.kStdErr_Lg!).toBeLessThan(0.05);
    expect(f.lnV0StdErr!).toBeLessThan(0.3);
  });

  it('over 200 seeds the ±2·se intervals hold the true k and v0 about 95 % of the time (Gauss–Newton standard errors, Bates & Watts 1988 [M])', () => {
    let k = 0;
    let v = 0;
    let fitted = 0;
    for (let seed = 1; seed <= 200; seed++) {
      const f = operatingSettlingFit(readings(seed, 30, 0.03)).fit.value;
      if (!f) continue;
      fitted++;
      if (Math.abs(f.k_Lg - TRUTH.k_Lg) <= 2 * f.kStdErr_Lg!) k++;
      if (Math.abs(Math.log(f.v0_mh / TRUTH.v0_mh)) <= 2 * f.lnV0StdErr!) v++;
    }
    expect(fitted).toBeGreaterThanOrEqual(195);
    for (const inside of [k, v]) {
      expect(inside / fitted).toBeGreaterThan(0.9);
      expect(inside / fitted).toBeLessThan(0.99);
    }
  });

  it('refuses with the reason: no periods, one underflow rate only, or readings that fit no limiting-flux curve', () => {
    expect(operatingSettlingFit([]).fit.reasons[0]).toMatch(/no period with a stable blanket/);
    const one = readings(2, 5, 0).map((r) => ({ ...r, underflowRate_mh: 0.4 }));
    expect(operatingSettlingFit(one).fit.reasons[0]).toMatch(/at least three at different rates/);
    // X_R rising with u: no Vesilind sludge does that at the limiting flux.
    const wrong = [0.2, 0.3, 0.4, 0.5].map((u, i) => ({ t_ms: i, underflowRate_mh: u, underflowTss_gL: 5 + 10 * u }));
    expect(operatingSettlingFit(wrong).fit.value).toBeNull();
  });
});

describe('stableBlanketReadings: periods of a stable blanket deep enough to be at the limiting flux', () => {
  // Three hours of minutes: hour 1 stable at 1.5 m, hour 2 rising 0.6 m/h, hour 3 stable but only 0.5 m (< 25 % of 4 m).
  const t0 = Date.UTC(2026, 10, 1, 6);
  const level = new Map<number, number>();
  const xr = new Map<number, number>();
  const qr = new Map<number, number>();
  const qw = new Map<number, number>();
  for (let m = 0; m < 180; m++) {
    const t = t0 + m * 60_000;
    level.set(t, m < 60 ? 1.5 : m < 120 ? 1.5 + (0.6 * (m - 60)) / 60 : 0.5);
    xr.set(t, 8);
    qr.set(t, 600);
    qw.set(t, 15);
  }
  const cl = { area_m2: 1500, sideWaterDepth_m: 4 };

  it('keeps the stable deep hour with its mean u = (Q_R + Q_W)/A and X_R; leaves out the rising and the shallow one', () => {
    const r = stableBlanketReadings({ level_m: level, underflowTss_gL: xr, rasFlow_m3h: qr, wasFlow_m3h: qw }, cl);
    // u = (600 + 15)/1500 = 0.41 m/h
    expect(r).toEqual([{ t_ms: t0 + 3_600_000, underflowRate_mh: 0.41, underflowTss_gL: 8 }]);
  });

  it('leaves out a period with a missing minute (a gap may hide a moving blanket)', () => {
    const gap = new Map(level);
    gap.delete(t0 + 30 * 60_000);
    expect(stableBlanketReadings({ level_m: gap, underflowTss_gL: xr, rasFlow_m3h: qr, wasFlow_m3h: qw }, cl)).toEqual([]);
  });
});
