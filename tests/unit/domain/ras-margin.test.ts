import { describe, expect, it } from 'vitest';
import { minRecycleRatio, rasMargin, type RasMarginInputs } from '../../../shared/domain/ras-margin.js';
import { mulberry32, uniform } from './prng.js';

const plant: RasMarginInputs = { influentFlow_m3h: 1000, rasFlow_m3h: 600, mlss_gL: 3, rasConcMax_gL: 10, rasPumpCapacity_m3h: 900 };

describe('RAS capacity margin (design §3 item 3)', () => {
  it('by hand: X_R,req = 8, margin 0.2, R_min = 3/7, Q_R,min = 428.57, pump margin 1 − 428.57/900', () => {
    const m = rasMargin(plant);
    expect(m.requiredRasConc_gL.value).toBeCloseTo(8, 12);
    expect(m.concentrationMargin.value).toBeCloseTo(0.2, 12);
    expect(m.minRecycleRatio.value).toBeCloseTo(3 / 7, 12);
    expect(m.minRasFlow_m3h.value).toBeCloseTo(3000 / 7, 9);
    expect(m.pumpMargin.value).toBeCloseTo(1 - 3000 / 7 / 900, 12);
    // concentration margin zero: 3·(Q + 600)/600 = 10 → Q = 1400
    expect(m.concentrationLimitFlow_m3h.value).toBeCloseTo(1400, 6);
    // pump margin zero: Q·3/7 = 900 → Q = 2100
    expect(m.pumpLimitFlow_m3h.value).toBeCloseTo(2100, 6);
  });

  it('R_min is unavailable when X_R,max ≤ X', () => {
    expect(minRecycleRatio(3, 3).quality).toBe('unavailable');
    expect(minRecycleRatio(3, 2.5).value).toBeNull();
    const m = rasMargin({ ...plant, rasConcMax_gL: 2 });
    expect(m.minRasFlow_m3h.value).toBeNull();
    expect(m.pumpMargin.value).toBeNull();
    expect(m.concentrationLimitFlow_m3h.value).toBeNull();
  });

  it('pump figures unavailable without a capacity; quality of X_R,max propagates', () => {
    const m = rasMargin({ ...plant, rasPumpCapacity_m3h: undefined, rasConcMaxQuality: { quality: 'estimated', reasons: ['SVI is 3 days old'] } });
    expect(m.pumpMargin.quality).toBe('unavailable');
    expect(m.concentrationMargin.quality).toBe('estimated');
    expect(m.concentrationMargin.reasons).toEqual(['SVI is 3 days old']);
    expect(m.requiredRasConc_gL.quality).toBe('good');
  });

  it('property: concentration and pump margins fall as influent flow rises (200 seeded cases)', () => {
    const rnd = mulberry32(5);
    for (let i = 0; i < 200; i++) {
      const x = uniform(rnd, 1, 6);
      const base: RasMarginInputs = {
        influentFlow_m3h: uniform(rnd, 10, 5000),
        rasFlow_m3h: uniform(rnd, 10, 4000),
        mlss_gL: x,
        rasConcMax_gL: x * uniform(rnd, 1.1, 5),
        rasPumpCapacity_m3h: uniform(rnd, 100, 6000),
      };
      const a = rasMargin(base);
      const b = rasMargin({ ...base, influentFlow_m3h: base.influentFlow_m3h * uniform(rnd, 1.01, 2) });
      expect(b.concentrationMargin.value!).toBeLessThan(a.concentrationMargin.value!);
      expect(b.pumpMargin.value!).toBeLessThan(a.pumpMargin.value!);
    }
  });

  it('never NaN for zero flows', () => {
    const m = rasMargin({ ...plant, influentFlow_m3h: 0, rasFlow_m3h: 0 });
    for (const f of Object.values(m)) if (f.value !== null) expect(Number.isFinite(f.value)).toBe(true);
    expect(m.requiredRasConc_gL.value).toBeNull();
  });
});
