import { describe, expect, it } from 'vitest';
import { limitingFlux } from '../../../shared/domain/flux.js';
import { statePoint, type StatePointInputs } from '../../../shared/domain/state-point.js';
import { vesilindVelocity_mh } from '../../../shared/domain/settling.js';
import { mulberry32, uniform } from './prng.js';

// Worked example after the state point method of Keinath (1985) as presented in Metcalf & Eddy,
// Wastewater Engineering: Treatment and Resource Recovery, 5th ed. (2014), ch. 8 — the numbers are an
// invented plant of our own and every expected value is computed by hand below. The textbook's own
// worked example (Example 8-3, clarifier step) is checked in textbook-example.test.ts.
const plant: StatePointInputs = {
  influentFlow_m3h: 1000,
  rasFlow_m3h: 600,
  mlss_gL: 3,
  clarifierArea_m2: 1600,
  vesilind: { v0_mh: 7.8, k_Lg: 0.4 },
};

describe('state point analysis (Keinath 1985; Keinath et al. 1977)', () => {
  it('worked example by hand', () => {
    const sp = statePoint(plant);
    // SOR = 1000/1600 = 0.625 m/h; SLR = 1600·3/1600 = 3 kg/(m²·h); u = 600/1600 = 0.375 m/h
    expect(sp.overflowRate_mh.value).toBeCloseTo(0.625, 12);
    expect(sp.solidsLoading_kgm2h.value).toBeCloseTo(3, 12);
    expect(sp.underflowRate_mh.value).toBeCloseTo(0.375, 12);
    // required underflow concentration = 1600·3/600 = 8 g/L
    expect(sp.requiredUnderflowConc_gL.value).toBeCloseTo(8, 12);
    // vs(3) = 7.8·e^(−1.2) = 7.8·0.301194 = 2.34931 m/h → clarification margin 1 − 0.625/2.34931 = 0.73396
    expect(sp.clarificationMargin.value).toBeCloseTo(0.73396, 4);
    // Limiting concentration: solve e^(−0.4X)(0.4X − 1) = 0.375/7.8 = 0.0480769 on X > 5 g/L.
    // By hand (Newton on y = 0.4X): y = 4.1975 gives e^(−4.1975)(3.1975) = 0.015035·3.1975 = 0.04807 → X_L ≈ 10.494 g/L,
    // G_L = (7.8·e^(−4.1975) + 0.375)·10.494 = (0.11727 + 0.375)·10.494 = 5.1658 kg/(m²·h)
    expect(sp.limitingConc_gL.value).toBeCloseTo(10.494, 2);
    expect(sp.limitingFlux_kgm2h.value).toBeCloseTo(5.166, 2);
    expect(sp.maxUnderflowConc_gL.value).toBeCloseTo(5.1658 / 0.375, 1);
    // thickening margin 1 − 3/5.1658 = 0.4193
    expect(sp.thickeningMargin.value).toBeCloseTo(0.4193, 3);
  });

  it('influent flows at zero margin (bisection) agree with the closed forms, Q_R held', () => {
    const sp = statePoint(plant);
    const gl = limitingFlux(0.375, plant.vesilind).value!.limitingFlux_kgm2h;
    // thickening: (Q + QR)·X/A = G_L → Q = G_L·A/X − QR
    expect(sp.thickeningLimitFlow_m3h.value).toBeCloseTo((gl * 1600) / 3 - 600, 6);
    // clarification: Q/A = vs(X) → Q = A·vs(X)
    expect(sp.clarificationLimitFlow_m3h.value).toBeCloseTo(1600 * vesilindVelocity_mh(3, plant.vesilind), 6);
  });

  it('property: thickening and clarification margins fall as influent flow rises (200 seeded cases)', () => {
    const rnd = mulberry32(99);
    for (let i = 0; i < 200; i++) {
      const base: StatePointInputs = {
        influentFlow_m3h: uniform(rnd, 50, 5000),
        rasFlow_m3h: uniform(rnd, 50, 3000),
        mlss_gL: uniform(rnd, 1, 6),
        clarifierArea_m2: uniform(rnd, 200, 5000),
        vesilind: { v0_mh: uniform(rnd, 4, 12), k_Lg: uniform(rnd, 0.2, 0.8) },
      };
      const more = { ...base, influentFlow_m3h: base.influentFlow_m3h * uniform(rnd, 1.01, 3) };
      const a = statePoint(base);
      const b = statePoint(more);
      expect(b.clarificationMargin.value!).toBeLessThan(a.clarificationMargin.value!);
      if (a.thickeningMargin.value !== null) expect(b.thickeningMargin.value!).toBeLessThan(a.thickeningMargin.value);
      else expect(b.thickeningMargin.value).toBeNull();
    }
  });

  it('carries settling-parameter quality and never returns NaN at edge inputs', () => {
    const est = statePoint({ ...plant, settlingQuality: { quality: 'estimated', reasons: ['from correlation'] } });
    expect(est.thickeningMargin.quality).toBe('estimated');
    expect(est.thickeningMargin.reasons).toContain('from correlation');
    const zeroRas = statePoint({ ...plant, rasFlow_m3h: 0 });
    expect(zeroRas.thickeningMargin.value).toBeNull();
    expect(zeroRas.requiredUnderflowConc_gL.value).toBeNull();
    const zeroQ = statePoint({ ...plant, influentFlow_m3h: 0 });
    expect(zeroQ.clarificationMargin.value).toBe(1);
    const noArea = statePoint({ ...plant, clarifierArea_m2: 0 });
    for (const f of Object.values(noArea)) expect(f.value).toBeNull();
    for (const sp of [zeroRas, zeroQ, noArea, statePoint({ ...plant, rasFlow_m3h: 1e5 })]) {
      for (const f of Object.values(sp)) if (f.value !== null) expect(Number.isFinite(f.value)).toBe(true);
    }
  });
});
