import { describe, expect, it } from 'vitest';
import { DEFAULT_STORM_CHECKS, stormProjection, type StormInputs } from '../../../shared/domain/storm.js';

// Invented plant of our own; expected values by hand.
const plant: StormInputs = {
  influentFlow_m3h: 1000,
  rasFlow_m3h: 600,
  mlss_gL: 3,
  svi_mLg: 120,
  aerationVolume_m3: 12000,
  clarifierArea_m2: 1600,
  stormFlow_m3h: 3000,
};

describe('storm projection (design §3 item 4)', () => {
  it('by hand: X_R,max = 10, X′ = 10·600/3600 = 1.6667, moved 16 000 kg, blanket 1920 m³, rise 1.2 m', () => {
    const p = stormProjection(plant).value!;
    expect(p.rasConcMax_gL).toBeCloseTo(10, 12);
    expect(p.equilibriumMlss_gL).toBeCloseTo(10 / 6, 12);
    expect(p.sludgeToClarifiers_kg).toBeCloseTo((3 - 10 / 6) * 12000, 6);
    // SVI 120 mL/g = 0.120 m³/kg → 16 000 kg · 0.12 = 1920 m³
    expect(p.blanketVolume_m3).toBeCloseTo(1920, 6);
    expect(p.blanketRise_m).toBeCloseTo(1.2, 9);
    expect(p.storedFraction).toBeCloseTo(16000 / 36000, 12);
  });

  it('rule-of-thumb checks with defaults (common practice of the trade: MLSS ≥ 2 g/L, ≤ 30 % stored, rise ≤ 0.3 m)', () => {
    expect(DEFAULT_STORM_CHECKS).toEqual({ minMlss_gL: 2, maxStoredFraction: 0.3, maxBlanketRise_m: 0.3 });
    const bad = stormProjection(plant).value!.checks;
    expect(bad.map((c) => [c.rule, c.ok])).toEqual([
      ['min-mlss', false],
      ['max-stored-fraction', false],
      ['max-blanket-rise', false],
    ]);
    expect(bad[0]).toMatchObject({ limit: 2 });
    // mild storm: X′ = 10·600/(1800+600) = 2.5 g/L; moved 0.5·12000 = 6000 kg; rise 6000·0.12/1600 = 0.45 m
    const mild = stormProjection({ ...plant, stormFlow_m3h: 1800 }).value!;
    expect(mild.checks.find((c) => c.rule === 'min-mlss')!.ok).toBe(true);
    expect(mild.checks.find((c) => c.rule === 'max-stored-fraction')!.ok).toBe(true); // 6000/36000 = 0.167
    expect(mild.checks.find((c) => c.rule === 'max-blanket-rise')).toMatchObject({ ok: false, value: expect.closeTo(0.45, 9), limit: 0.3 });
    const custom = stormProjection({ ...plant, stormFlow_m3h: 1800, checks: { maxBlanketRise_m: 0.5 } }).value!;
    expect(custom.checks.find((c) => c.rule === 'max-blanket-rise')!.ok).toBe(true);
  });

  it('existing clarifier mass counts in the stored fraction; cap limits the return flow', () => {
    const p = stormProjection({ ...plant, stormFlow_m3h: 1800, clarifierMass_kg: 4000 }).value!;
    expect(p.clarifierMassAfter_kg).toBeCloseTo(10000, 6);
    expect(p.storedFraction).toBeCloseTo(10000 / 40000, 12);
    const capped = stormProjection({ ...plant, rasFlowCap_m3h: 300 }).value!;
    expect(capped.stormRasFlow_m3h).toBe(300);
    expect(capped.equilibriumMlss_gL).toBeCloseTo((10 * 300) / 3300, 12);
  });

  it('no sludge moves when the clarifier can hold the storm; zero flows give finite numbers', () => {
    const calm = stormProjection({ ...plant, stormFlow_m3h: 500 }).value!;
    expect(calm.equilibriumMlss_gL).toBe(3);
    expect(calm.sludgeToClarifiers_kg).toBe(0);
    const zero = stormProjection({ ...plant, rasFlow_m3h: 0, stormFlow_m3h: 0, influentFlow_m3h: 0 }).value!;
    for (const v of [zero.equilibriumMlss_gL, zero.sludgeToClarifiers_kg, zero.blanketRise_m, zero.storedFraction]) expect(Number.isFinite(v)).toBe(true);
    const noRas = stormProjection({ ...plant, rasFlow_m3h: 0 }).value!;
    expect(noRas.equilibriumMlss_gL).toBe(0); // with no return every kilogram ends in the clarifier
    expect(stormProjection({ ...plant, clarifierArea_m2: 0 }).quality).toBe('unavailable');
    expect(stormProjection({ ...plant, svi_mLg: 0 }).value).toBeNull();
  });
});
