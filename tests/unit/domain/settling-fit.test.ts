import { describe, expect, it } from 'vitest';
import { computeBalance } from '../../../shared/domain/balance/assemble.js';
import { calcStatePoint } from '../../../shared/domain/calculators.js';
import { fitVesilind } from '../../../shared/domain/settling.js';
import { settlingPointFromTest, type LabSettlingTest } from '../../../shared/domain/settling-fit.js';
import { fixtureInputs, NOW, settings } from './balance-fixture.js';
import { mulberry32, uniform } from './prng.js';

/** Standard normal deviate by Box–Muller (Box & Muller 1958, Ann. Math. Stat. 29:610). */
function normal(rnd: () => number): number {
  return Math.sqrt(-2 * Math.log(1 - rnd())) * Math.cos(2 * Math.PI * rnd());
}

describe('fitVesilind recovers known v0 and k within its stated uncertainty (OLS of ln v on X; standard errors as in Draper & Smith 1998 ch. 1 [M])', () => {
  const v0 = 8;
  const k = 0.5;
  const points = (seed: number, n: number, sd: number) => {
    const rnd = mulberry32(seed);
    return Array.from({ length: n }, () => {
      const x = uniform(rnd, 1, 8);
      return { conc_gL: x, velocity_mh: v0 * Math.exp(-k * x) * Math.exp(sd * normal(rnd)) };
    });
  };
  it('seed 16, 30 points, 10 % log-normal noise: |k̂ − k| ≤ 2·se(k) and |ln v̂0 − ln v0| ≤ 2·se(ln v0)', () => {
    const f = fitVesilind(points(16, 30, 0.1)).value!;
    expect(f.kStdErr_Lg).not.toBeNull();
    expect(Math.abs(f.k_Lg - k)).toBeLessThanOrEqual(2 * f.kStdErr_Lg!);
    expect(Math.abs(Math.log(f.v0_mh) - Math.log(v0))).toBeLessThanOrEqual(2 * f.lnV0StdErr!);
    // the stated uncertainty is not vacuous: about sd/√(Σ(x − x̄)²) ≈ 0.1/√(30·4.1) ≈ 0.009 L/g
    expect(f.kStdErr_Lg!).toBeLessThan(0.02);
  });
  it('over 400 seeds the ±2·se interval of k holds the true k about 95 % of the time (t-quantile 2.05 for 28 d.f.)', () => {
    let inside = 0;
    for (let seed = 1; seed <= 400; seed++) {
      const f = fitVesilind(points(seed, 30, 0.1)).value!;
      if (Math.abs(f.k_Lg - k) <= 2 * f.kStdErr_Lg!) inside++;
    }
    expect(inside / 400).toBeGreaterThan(0.9);
    expect(inside / 400).toBeLessThan(0.99);
  });
  it('exact points give zero standard errors; two points give none', () => {
    const exact = [1, 3, 5].map((x) => ({ conc_gL: x, velocity_mh: v0 * Math.exp(-k * x) }));
    expect(fitVesilind(exact).value!.kStdErr_Lg).toBeCloseTo(0, 9);
    expect(fitVesilind(exact.slice(0, 2)).value!.kStdErr_Lg).toBeNull();
  });
});

describe('settling points from the lab\'s settleability tests (our approximation: 30-min mean interface velocity)', () => {
  it('SVI: 360 mL/L at 3 g/L in a cylinder with the 1 L mark at 0.35 m: v = 0.35·(1 − 0.36)/0.5 = 0.448 m/h at 3 g/L', () => {
    expect(settlingPointFromTest({ kind: 'SVI', settledVolume_mLL: 360, mlss_gL: 3, sampledAt_ms: 0 }, 0.35)).toEqual({ conc_gL: 3, velocity_mh: expect.closeTo(0.448, 12) });
  });
  it('DSVI 1:3 of a 3.4 g/L sample settles at 3.4/3 g/L; no interface (1000 mL/L) gives no point', () => {
    expect(settlingPointFromTest({ kind: 'DSVI', settledVolume_mLL: 170, mlss_gL: 3.4, dilutionFactor: 3, sampledAt_ms: 0 }, 0.35)!.conc_gL).toBeCloseTo(3.4 / 3, 12);
    expect(settlingPointFromTest({ kind: 'SVI', settledVolume_mLL: 1000, mlss_gL: 3, sampledAt_ms: 0 }, 0.35)).toBeNull();
  });
});

/** Tests whose 30-min mean velocities follow v = 0.6·e^(−0.3·X) exactly (SV30 453 … 858 mL/L), one a day, at MLSS 1.5 … 6 g/L. */
function tests(n: number): LabSettlingTest[] {
  return Array.from({ length: n }, (_, i) => {
    const x = 1.5 + (4.5 * i) / Math.max(1, n - 1);
    const v = 0.6 * Math.exp(-0.3 * x);
    // v = H·(1 − SV/1000)/0.5 → SV = 1000·(1 − 0.5·v/H), H = 0.35 m
    return { kind: 'SVI' as const, settledVolume_mLL: 1000 * (1 - (0.5 * v) / 0.35), mlss_gL: x, sampledAt_ms: NOW - (n - i) * 86_400_000 };
  });
}

describe('computeBalance: the state point uses the fit from settling.fit_min_points tests on, the correlation below', () => {
  it('12 tests (≥ 10): the fit v0 = 0.6 m/h, k = 0.3 L/g is used, said so, with n and the date range; the state point equals the calculator with those parameters', () => {
    const inp = { ...fixtureInputs(), settlingTests: tests(12) };
    const d = computeBalance(inp, settings()).data;
    expect(d.settling.used.source).toBe('fit');
    expect(d.settling.fit).toMatchObject({ n: 12, minPoints: 10, quality: 'estimated' });
    expect(d.settling.fit.v0_mh).toBeCloseTo(0.6, 9);
    expect(d.settling.fit.k_Lg).toBeCloseTo(0.3, 9);
    expect(d.settling.fit.from).toBe(new Date(NOW - 12 * 86_400_000).toISOString());
    expect(d.settling.fit.to).toBe(new Date(NOW - 86_400_000).toISOString());
    expect(d.settling.correlation).toMatchObject({ correlation: 'haertel-poepel-1992' });
    expect(d.settling.used.reasons.join(' ')).toMatch(/fit to the plant's own 12 settleability tests/);
    const sp = d.clarifiers[0]!.statePoint;
    expect(sp.settling.source).toBe('fit');
    const calc = calcStatePoint({ influentFlow_m3h: 800, rasFlow_m3h: 600, wasFlow_m3h: 20, mlss_gL: 3, clarifierArea_m2: 1500, settling: { v0_mh: d.settling.fit.v0_mh!, k_Lg: d.settling.fit.k_Lg! } });
    // u = 0.413 m/h ≥ v0·e⁻² = 0.081 m/h: no limiting flux either way (flux.ts), the clarification margin is there
    expect(sp.limitingFlux_kgm2h.value).toBe(calc.limitingFlux_kgm2h);
    expect(sp.clarificationMargin.value).toBe(calc.clarificationMargin);
    expect(sp.clarificationMargin.quality).toBe('estimated');
  });
  it('5 tests (< 10): the correlation is used and the reason names the count', () => {
    const d = computeBalance({ ...fixtureInputs(), settlingTests: tests(5) }, settings()).data;
    expect(d.settling.used.source).toBe('correlation');
    expect(d.settling.fit.n).toBe(5);
    expect(d.settling.used.reasons.join(' ')).toMatch(/the lab fit has 5 test\(s\).*fewer than 10/);
  });
});
