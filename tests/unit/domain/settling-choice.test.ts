import { describe, expect, it } from 'vitest';
import { computeBalance } from '../../../shared/domain/balance/assemble.js';
import { plantBlanketReadings, plantOperatingFit } from '../../../shared/domain/balance/operating-settling.js';
import { chooseSettling } from '../../../shared/domain/balance/state-point.js';
import { calcStatePoint } from '../../../shared/domain/calculators.js';
import { good } from '../../../shared/domain/quality.js';
import { vesilindFromIndex } from '../../../shared/domain/settling.js';
import { operatingSettlingFit, plantSettlingFit, type BlanketReading, type LabSettlingTest } from '../../../shared/domain/settling-fit.js';
import { fixtureInputs, NOW, SIG, settings } from './balance-fixture.js';
import { operatingMinutes, operatingUnderflowRate } from './operating-series.js';
import { rasConcMaxFlux_gL } from '../../../shared/domain/flux.js';

const H = 3_600_000;

/** Lab tests whose 30-min mean velocities follow v = 0.6·e^(−0.3·X) exactly (as in settling-fit.test.ts), one a day. */
function labTests(n: number): LabSettlingTest[] {
  return Array.from({ length: n }, (_, i) => {
    const x = 1.5 + (4.5 * i) / Math.max(1, n - 1);
    const v = 0.6 * Math.exp(-0.3 * x);
    // v = H·(1 − SV/1000)/0.5 h with H = 0.35 m → SV = 1000·(1 − 0.5·v/0.35)
    return { kind: 'SVI' as const, settledVolume_mLL: 1000 * (1 - (0.5 * v) / 0.35), mlss_gL: x, sampledAt_ms: NOW - (n - i) * 86_400_000 };
  });
}

/** Stable-blanket hours of a sludge with v0 = 6 m/h, k = 0.5 L/g at the limiting flux X_R = G_L/u (Keinath et al. 1977). */
const TRUTH = { v0_mh: 6, k_Lg: 0.5 };
function hours(n: number): BlanketReading[] {
  return Array.from({ length: n }, (_, i) => {
    const u = operatingUnderflowRate(i);
    return { t_ms: NOW - (n - i) * H, underflowRate_mh: u, underflowTss_gL: rasConcMaxFlux_gL(u, TRUTH).value! };
  });
}

const svi = good(120);
const lab = (n: number) => ({ fit: plantSettlingFit(labTests(n), 0.35), minPoints: 10 });
const op = (n: number) => ({ fit: operatingSettlingFit(hours(n)), minPoints: 24 });

describe('chooseSettling: lab fit → operating fit → correlation, each from its minimum number of points', () => {
  it('12 lab tests (≥ 10): the lab fit v0 = 0.6 m/h, k = 0.3 L/g is used even beside an operating fit with enough hours, with n, dates and standard errors', () => {
    const { used, out } = chooseSettling(svi, 'haertel-poepel-1992', lab(12), op(30));
    expect(used.source).toBe('fit');
    expect(out.used).toMatchObject({ source: 'fit', n: 12, from: new Date(NOW - 12 * 86_400_000).toISOString(), to: new Date(NOW - 86_400_000).toISOString() });
    expect(out.used.v0_mh).toBeCloseTo(0.6, 9);
    expect(out.used.k_Lg).toBeCloseTo(0.3, 9);
    // exact points: the standard errors are zero (OLS residuals vanish)
    expect(out.used.kStdErr_Lg).toBeCloseTo(0, 9);
    expect(out.operatingFit).toMatchObject({ n: 30, minPoints: 24 });
  });

  it('5 lab tests (< 10) and 30 stable-blanket hours (≥ 24): the operating fit recovers v0 = 6 m/h, k = 0.5 L/g and is used, said why', () => {
    const { used, out } = chooseSettling(svi, 'haertel-poepel-1992', lab(5), op(30));
    expect(used.source).toBe('operating-fit');
    expect(out.used.v0_mh).toBeCloseTo(6, 5);
    expect(out.used.k_Lg).toBeCloseTo(0.5, 6);
    expect(out.used).toMatchObject({ n: 30, from: new Date(NOW - 30 * H).toISOString(), to: new Date(NOW - H).toISOString(), quality: 'estimated' });
    expect(out.used.lnV0StdErr).not.toBeNull();
    expect(out.used.reasons.join(' ')).toMatch(/30 stable-blanket hours \(≥ 24, setting settling.operating_fit_min_points\): the lab fit has 5 test\(s\), fewer than 10/);
    expect(out.fit.n).toBe(5);
  });

  it('5 lab tests and 20 hours (< 24): the correlation of the latest SVI is used, the reason names both counts', () => {
    const { used, out } = chooseSettling(svi, 'haertel-poepel-1992', lab(5), op(20));
    expect(used.source).toBe('correlation');
    const corr = vesilindFromIndex(120, 'haertel-poepel-1992').value!;
    expect(out.used).toMatchObject({ v0_mh: corr.v0_mh, k_Lg: corr.k_Lg, n: null, from: null, kStdErr_Lg: null });
    expect(out.used.reasons.join(' ')).toMatch(/lab fit has 5 test\(s\), fewer than 10.*operating fit has 20 stable-blanket hour\(s\), fewer than 24/);
    expect(out.operatingFit).toMatchObject({ n: 20 });
    expect(out.operatingFit!.v0_mh).toBeCloseTo(6, 5);
  });

  it('an operating fit with enough hours but no result (one underflow rate only) is not used; without one at all it is left out', () => {
    const flat = hours(30).map((r) => ({ ...r, underflowRate_mh: 0.4 }));
    const { used, out } = chooseSettling(svi, 'haertel-poepel-1992', lab(0), { fit: operatingSettlingFit(flat), minPoints: 24 });
    expect(used.source).toBe('correlation');
    expect(out.used.reasons.join(' ')).toMatch(/operating fit has 30 stable-blanket hour\(s\) and no result \(.*at least three at different rates/);
    const none = chooseSettling(svi, 'haertel-poepel-1992', lab(0), null);
    expect(none.used.source).toBe('correlation');
    expect(none.out.operatingFit).toBeUndefined();
  });
});

describe('plantBlanketReadings: the stable-blanket hours of a plant from its minute series', () => {
  /** The fixture plant (one train, clarifier sc1 1500 m²) with 6 h of generated operation ending at the hour before NOW. */
  function inputs(h: number) {
    const inp = fixtureInputs({ hours: 0 });
    const end = Math.floor(NOW / H) * H;
    const mins = operatingMinutes(TRUTH, end - h * H, h);
    const pts = (f: (m: (typeof mins)[number]) => number) => mins.map((m) => ({ t_ms: m.t_ms, mean: f(m), qualityCode: 0 }));
    inp.series.set(SIG.lv.tagId, pts((m) => m.level_m));
    inp.series.set(SIG.xr.tagId, pts((m) => m.underflowTss_gL));
    inp.series.set(SIG.qr.tagId, pts((m) => m.rasFlow_m3h));
    inp.series.set(SIG.qw.tagId, pts((m) => m.wasFlow_m3h));
    return { inp, end };
  }

  it('6 generated hours give 6 periods with u = (Q_R + Q_W)/A and X_R as generated; the fit through them is the truth', () => {
    const { inp, end } = inputs(6);
    const r = plantBlanketReadings(inp, end - 6 * H, end);
    const got = r.byClarifier.get(20)!;
    expect(got).toHaveLength(6);
    // hour starting at t: u = 0.2 + 0.4·((7·t/H) mod 12)/11; Q_R + Q_W = u·1500 by construction
    for (const g of got) {
      const u = operatingUnderflowRate(Math.round((g.t_ms - H) / H));
      expect(g.underflowRate_mh).toBeCloseTo(u, 12);
      expect(g.underflowTss_gL).toBeCloseTo(rasConcMaxFlux_gL(u, TRUTH).value!, 9);
    }
    const f = plantOperatingFit(r, { windowFrom_ms: end - 6 * H, scannedFrom_ms: end - 6 * H, scannedTo_ms: end, window_d: 0.25 }).fit.value!;
    expect(f.v0_mh).toBeCloseTo(6, 5);
    expect(f.k_Lg).toBeCloseTo(0.5, 6);
  });

  it('[from, to) bounds: an hour outside is not read; a train with two clarifier entries and a clarifier without an underflow TSS tag are left out with the reason', () => {
    const { inp, end } = inputs(6);
    expect(plantBlanketReadings(inp, end - 2 * H, end).byClarifier.get(20)).toHaveLength(2);
    const two = { ...inp, layout: { ...inp.layout, trains: [{ ...inp.layout.trains[0]!, clarifiers: [inp.layout.trains[0]!.clarifiers[0]!, { id: 21, code: 'sc2', area_m2: 1500, sideWaterDepth_m: 4, count: 1 }] }] } };
    const r2 = plantBlanketReadings(two, end - 6 * H, end);
    expect(r2.byClarifier.size).toBe(0);
    expect(r2.left.join(' ')).toMatch(/sc1: left out of the operating fit, train t1 has 2 clarifier entries/);
    const noXr = { ...inp, readings: inp.readings.filter((x) => x.tagId !== SIG.xr.tagId) };
    const r3 = plantBlanketReadings(noXr, end - 6 * H, end);
    expect(r3.left).toEqual(['sc1: left out of the operating fit, no tag for its underflow TSS']);
    expect(plantOperatingFit(r3, { windowFrom_ms: end - 6 * H, scannedFrom_ms: end - 6 * H, scannedTo_ms: end, window_d: 1 }).fit).toMatchObject({ value: null, quality: 'unavailable' });
  });
});

describe('computeBalance with an operating fit: the state point uses it when the lab fit is short, and equals the calculator with those parameters', () => {
  it('no lab tests, 30 hours (≥ 24): source operating-fit on the plant and on every state point', () => {
    const operatingFit = operatingSettlingFit(hours(30));
    const d = computeBalance({ ...fixtureInputs(), operatingFit }, settings()).data;
    expect(d.settling.used.source).toBe('operating-fit');
    const sp = d.clarifiers[0]!.statePoint;
    expect(sp.settling).toMatchObject({ source: 'operating-fit', n: 30 });
    const calc = calcStatePoint({ influentFlow_m3h: 800, rasFlow_m3h: 600, wasFlow_m3h: 20, mlss_gL: 3, clarifierArea_m2: 1500, settling: { v0_mh: sp.settling.v0_mh!, k_Lg: sp.settling.k_Lg! } });
    // u = 620/1500 = 0.4133 m/h < v0·e⁻² = 0.812 m/h: a limiting flux exists (flux.ts)
    expect(sp.limitingFlux_kgm2h.value).toBe(calc.limitingFlux_kgm2h);
    expect(sp.thickeningMargin.value).toBe(calc.thickeningMargin);
    // and flux theory's X_R,max at that u is the generated truth's, G_L/u (Keinath et al. 1977)
    expect(sp.rasConcMax.flux_gL.value).toBeCloseTo(rasConcMaxFlux_gL(620 / 1500, TRUTH).value!, 5);
    const fewer = computeBalance({ ...fixtureInputs(), operatingFit: operatingSettlingFit(hours(10)) }, settings()).data;
    expect(fewer.settling.used.source).toBe('correlation');
    expect(fewer.settling.operatingFit).toMatchObject({ n: 10, minPoints: 24 });
  });
});
