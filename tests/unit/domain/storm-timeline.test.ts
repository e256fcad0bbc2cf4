import { describe, expect, it } from 'vitest';
import { stormProjection } from '../../../shared/domain/storm.js';
import { hydrographFlowAt, stormTimeline } from '../../../shared/domain/storm-timeline.js';

/**
 * The storm example of the calculator tests (design §3 item 4): Q = 1500 m³/h, Q_R = 900 m³/h,
 * X = 3.2 g/L, SVI 120 mL/g, V = 12 000 m³, A = 1400 m², storm 3000 m³/h. X_R,max = 1200/120 =
 * 10 g/L (rule of thumb [CP]); equilibrium X' = 10·900/3900 = 2.3077 g/L (storm.ts); the basin
 * relaxes toward it with τ = V/(Q_storm + Q_R) = 12 000/3900 = 3.077 h (completely mixed tank).
 */
const base = { influentFlow_m3h: 1500, rasFlow_m3h: 900, mlss_gL: 3.2, svi_mLg: 120, aerationVolume_m3: 12000, clarifierArea_m2: 1400, clarifierDepth_m: 4, blanketNow_m: 0.5 };
const step = (hours: number, flow = 3000) => [
  { t_h: 0, flow_m3h: flow },
  { t_h: hours, flow_m3h: flow },
];
const eq = stormProjection({ ...base, stormFlow_m3h: 3000 }).value!;

describe('storm timeline: basin as a CSTR, clarifier return capped at X_R,max·Q_R', () => {
  it('a 48 h constant storm ends within 1 % of the equilibrium projection (48 h = 15.6 τ)', () => {
    const r = stormTimeline({ ...base, hydrograph: step(48) });
    expect(r.quality).toBe('good');
    const last = r.value!.points.at(-1)!;
    expect(last.t_h).toBe(48);
    expect(Math.abs(last.mlss_gL - eq.equilibriumMlss_gL) / eq.equilibriumMlss_gL).toBeLessThan(0.01);
    expect(Math.abs(last.clarifierMass_kg - eq.sludgeToClarifiers_kg) / eq.sludgeToClarifiers_kg).toBeLessThan(0.01);
    // blanket rise of the moved sludge as storm.ts: mass·SVI·1e-3/A, on top of the 0.5 m before the storm
    expect(last.blanket_m - 0.5).toBeCloseTo(eq.blanketRise_m, 2);
  });

  it('a 2 h storm moves less than half the equilibrium mass: 1 − e^(−2/3.077) = 0.478 of it', () => {
    const r = stormTimeline({ ...base, hydrograph: step(2) }).value!;
    const moved = r.points.at(-1)!.clarifierMass_kg;
    expect(moved / eq.sludgeToClarifiers_kg).toBeLessThan(0.5);
    // exact for the capped regime: X(t) = X' + (X0 − X')·e^(−t/τ)
    expect(moved / eq.sludgeToClarifiers_kg).toBeCloseTo(1 - Math.exp(-2 / (12000 / 3900)), 4);
  });

  it('the stored sludge returns after the storm and the basin recovers its MLSS', () => {
    const r = stormTimeline({ ...base, hydrograph: [{ t_h: 0, flow_m3h: 3000 }, { t_h: 6, flow_m3h: 3000 }, { t_h: 6, flow_m3h: 1500 }, { t_h: 30, flow_m3h: 1500 }] }).value!;
    const at6 = r.points.find((p) => p.t_h === 6)!;
    expect(at6.clarifierMass_kg).toBeGreaterThan(0.8 * eq.sludgeToClarifiers_kg);
    const end = r.points.at(-1)!;
    expect(end.mlss_gL).toBeCloseTo(3.2, 6);
    expect(end.clarifierMass_kg).toBeCloseTo(0, 3);
    // required X_R at the dry-weather flow: X·(Q + Q_R)/Q_R = 3.2·2400/900
    expect(end.rasConcRequired_gL).toBeCloseTo((3.2 * 2400) / 900, 6);
  });

  it('a deep blanket reaches the surface: the check fails with its time, the level is capped, never good', () => {
    const r = stormTimeline({ ...base, blanketNow_m: 3.5, hydrograph: step(12) });
    expect(r.quality).toBe('estimated');
    const v = r.value!;
    expect(v.blanketReachesSurface_h).not.toBeNull();
    // rise needed 0.5 m = mass·0.12/1400 → mass 5833 kg > the 0.478·… moved in 2 h? find it by the closed form:
    // moved(t) = (X0 − X')·V·(1 − e^(−t/τ)); 5833.3 = 10 615.4·(1 − e^(−t/3.077)) → t = 2.46 h
    const need = (0.5 * 1400) / 0.12;
    const tExpect = -(12000 / 3900) * Math.log(1 - need / eq.sludgeToClarifiers_kg);
    expect(v.blanketReachesSurface_h!).toBeCloseTo(tExpect, 1);
    const surface = v.checks.find((c) => c.rule === 'blanket-below-surface')!;
    expect(surface).toMatchObject({ ok: false, limit: 4 });
    expect(surface.firstFailed_h).toBe(v.blanketReachesSurface_h);
    expect(v.peakBlanket_m).toBe(4);
    for (const p of v.points) expect(p.blanket_m).toBeLessThanOrEqual(4);
    expect(v.firstFailure_h).not.toBeNull();
    expect(r.reasons.join(' ')).toMatch(/reaches the clarifier surface/);
  });

  it('checks carry the first failure time; a storm the clarifier can pass moves nothing', () => {
    const r = stormTimeline({ ...base, hydrograph: step(12) }).value!;
    const rise = r.checks.find((c) => c.rule === 'max-blanket-rise')!;
    // 0.3 m rise = 3500 kg: 3500 = 10 615.4·(1 − e^(−t/3.077)) → t = 1.23 h
    expect(rise.firstFailed_h!).toBeCloseTo(-(12000 / 3900) * Math.log(1 - 3500 / eq.sludgeToClarifiers_kg), 1);
    expect(r.firstFailure_h).toBe(Math.min(...r.checks.flatMap((c) => (c.firstFailed_h === null ? [] : [c.firstFailed_h]))));
    // 1800 m³/h: (1800 + 900)·3.2 = 8640 kg/h < 10·900 = 9000 kg/h: all is returned
    const mild = stormTimeline({ ...base, hydrograph: step(12, 1800) }).value!;
    expect(mild.points.at(-1)!.clarifierMass_kg).toBeCloseTo(0, 9);
    expect(mild.firstFailure_h).toBeNull();
  });

  it('no blanket level given: rise only, estimated and said; invalid hydrographs are refused', () => {
    const { blanketNow_m: _, ...noLevel } = base;
    const r = stormTimeline({ ...noLevel, hydrograph: step(2) });
    expect(r.quality).toBe('estimated');
    expect(r.reasons.join(' ')).toMatch(/blanket level before the storm not given/);
    expect(stormTimeline({ ...base, hydrograph: [{ t_h: 0, flow_m3h: 1 }] }).value).toBeNull();
    expect(stormTimeline({ ...base, hydrograph: [{ t_h: 2, flow_m3h: 1 }, { t_h: 1, flow_m3h: 1 }] }).value).toBeNull();
  });

  it('hydrograph: linear between points, a repeated time is a step', () => {
    const h = [{ t_h: 0, flow_m3h: 100 }, { t_h: 2, flow_m3h: 300 }, { t_h: 2, flow_m3h: 50 }, { t_h: 4, flow_m3h: 50 }];
    expect(hydrographFlowAt(h, 1)).toBe(200);
    expect(hydrographFlowAt(h, 1.999)).toBeCloseTo(299.9, 9);
    expect(hydrographFlowAt(h, 2)).toBe(50);
    expect(hydrographFlowAt(h, 9)).toBe(50);
  });
});
