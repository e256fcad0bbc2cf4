import { describe, expect, it } from 'vitest';
import { PlantModel } from '../../../simulators/model/plant-model.js';
import { DEMO_PLANT } from '../../../simulators/plant/demo-plant.js';
import { loadScenario, parseScenario } from '../../../simulators/scenarios/load-scenario.js';
import type { ScenarioInput } from '../../../simulators/scenarios/scenario.schema.js';
import { stormProjection } from '../../../shared/domain/storm.js';

function series(seed: number, hours: number): number[] {
  const m = new PlantModel(DEMO_PLANT, loadScenario('demo', DEMO_PLANT), { seed, startHourOfDay: 8 });
  const out: number[] = [];
  for (let h = 0.25; h <= hours; h += 0.25) {
    m.advanceTo(h);
    const s = m.snapshot();
    out.push(s.influentFlow_m3h, ...s.trains.flatMap((t) => [t.mlss_gL, t.blanketLevel_m, t.underflowTss_gL, t.effluentTss_gL]));
  }
  return out;
}

describe('plant model determinism', () => {
  it('replays the same series for the same seed and a different one for another seed', () => {
    // The demo scenario draws random showers and AR(1) flow noise from the seed.
    const a = series(42, 30);
    const b = series(42, 30);
    const c = series(43, 30);
    expect(b).toEqual(a);
    expect(c).not.toEqual(a);
    expect(a.every(Number.isFinite)).toBe(true);
  });
});

describe('solids mass balance', () => {
  it('closes to 1e-6 relative over a simulated day: Δinventory = production − wasting − effluent', () => {
    // The storm scenario moves sludge between basins and clarifiers, so a leak in the RAS
    // coupling or the settler would show here; timer wasting checks the WAS path too.
    const sc = loadScenario('storm', DEMO_PLANT);
    const timerSc = { ...sc, was: { mode: 'timer' as const, flowPerTrain_m3h: 33, on_min: 20, period_min: 60 } };
    for (const scenario of [sc, timerSc]) {
      const m = new PlantModel(DEMO_PLANT, scenario, { seed: 7 });
      const m0 = m.inventory_kg();
      m.advanceTo(24);
      const acc = m.accounting();
      const change = m.inventory_kg() - m0;
      const balance = acc.production_kg - acc.wasted_kg - acc.effluent_kg;
      // Sanity: the terms are large (tonnes), so the check is not trivially satisfied.
      expect(acc.production_kg).toBeGreaterThan(2000);
      expect(acc.wasted_kg).toBeGreaterThan(1000);
      expect(acc.effluent_kg).toBeGreaterThan(100);
      expect(Math.abs(change - balance) / m0).toBeLessThan(1e-6);
    }
  });

  it('needs wasting to hold the inventory: without WAS the sludge mass grows by the net production', () => {
    const base = loadScenario('dry-weather', DEMO_PLANT);
    const noWas = new PlantModel(DEMO_PLANT, { ...base, was: { mode: 'flow', flowPerTrain_m3h: 0 } }, { seed: 1 });
    const withWas = new PlantModel(DEMO_PLANT, base, { seed: 1 });
    const m0 = noWas.inventory_kg();
    noWas.advanceTo(48);
    withWas.advanceTo(48);
    const acc = noWas.accounting();
    expect(noWas.inventory_kg() - m0).toBeGreaterThan(0.8 * acc.production_kg);
    // Continuous wasting of 11 m³/h per train at ~6.5 g/L (≈ 3.4 t/d) holds it within 5 %.
    expect(Math.abs(withWas.inventory_kg() - m0) / m0).toBeLessThan(0.05);
  });
});

describe('RAS control', () => {
  it('never exceeds the pump capacity and stops while the pump is tripped', () => {
    const m = new PlantModel(DEMO_PLANT, loadScenario('ras-pump-trip', DEMO_PLANT), { seed: 3 });
    const cap = DEMO_PLANT.trains[0]!.pumps.find((p) => p.kind === 'ras')!.capacity_m3h;
    const before = m.snapshot();
    m.advanceTo(2.5);
    const during = m.snapshot();
    expect(during.trains[0]!.rasRunning).toBe(false);
    expect(during.trains[0]!.rasFlow_m3h).toBe(0);
    expect(during.trains[1]!.rasRunning).toBe(true);
    m.advanceTo(3.45);
    const late = m.snapshot();
    // Clarifier 1 keeps receiving feed but returns nothing: about 2.6 t of sludge pile up in
    // it (thickening the floor layers first, then lifting the blanket), basin 1 sags.
    expect(late.trains[0]!.clarifierMass_kg).toBeGreaterThan(before.trains[0]!.clarifierMass_kg + 2000);
    expect(late.trains[0]!.underflowTss_gL).toBeGreaterThan(before.trains[0]!.underflowTss_gL + 2);
    expect(late.trains[0]!.blanketLevel_m).toBeGreaterThan(before.trains[0]!.blanketLevel_m + 0.1);
    expect(late.trains[0]!.mlss_gL).toBeLessThan(before.trains[0]!.mlss_gL - 0.3);
    expect(Math.abs(late.trains[1]!.blanketLevel_m - before.trains[1]!.blanketLevel_m)).toBeLessThan(0.05);
    m.advanceTo(8);
    const after = m.snapshot();
    expect(after.trains[0]!.rasRunning).toBe(true);
    expect(after.trains[0]!.blanketLevel_m).toBeLessThan(late.trains[0]!.blanketLevel_m);
    const storm = new PlantModel(DEMO_PLANT, loadScenario('storm', DEMO_PLANT), { seed: 3 });
    for (let h = 0.5; h <= 20; h += 0.5) {
      storm.advanceTo(h);
      for (const t of storm.snapshot().trains) expect(t.rasFlow_m3h).toBeLessThanOrEqual(cap);
    }
  });
});

describe('storm', () => {
  it('lowers MLSS and raises the blankets, and both recover afterwards', () => {
    const m = new PlantModel(DEMO_PLANT, loadScenario('storm', DEMO_PLANT), { seed: 11 });
    m.advanceTo(5.5); // just before the storm (starts at hour 6)
    const before = m.snapshot();
    m.advanceTo(13); // storm plateau
    const peak = m.snapshot();
    m.advanceTo(30);
    const after = m.snapshot();
    for (let i = 0; i < 2; i++) {
      expect(peak.trains[i]!.mlss_gL).toBeLessThan(before.trains[i]!.mlss_gL - 0.4);
      expect(peak.trains[i]!.blanketLevel_m).toBeGreaterThan(before.trains[i]!.blanketLevel_m + 0.2);
      expect(after.trains[i]!.mlss_gL).toBeGreaterThan(peak.trains[i]!.mlss_gL + 0.3);
      expect(after.trains[i]!.blanketLevel_m).toBeLessThan(peak.trains[i]!.blanketLevel_m);
    }
  });

  it('settles at the MLSS of the shared storm projection, within the rule of thumb’s margin', () => {
    // Constant flows, no production, no wasting: the loop then reaches a true equilibrium in
    // which the clarifier is critically loaded and X' = X_u·Q_R/(Q + Q_R).
    const raw: ScenarioInput = {
      name: 'steady-storm',
      description: 'constant storm flow for the equilibrium check',
      initial: { mlss_gL: 3.6 },
      influent: {
        averageFlow_m3h: 1540,
        diurnal: { amplitude: 0, secondAmplitude: 0, peakHour: 0 },
        bod_gm3: 180,
        noise: { sd: 0, tau_h: 1 },
        storms: [{ start_h: 2, duration_h: 100, rise_h: 0.5, multiplier: 2 }],
      },
      svi: { initial_mLg: 150 },
      yield_gTSSgBOD: 0,
      ras: { ratio: 1, minFlowPerTrain_m3h: 100 },
      was: { mode: 'flow', flowPerTrain_m3h: 0 },
    };
    // RAS pumps of 850 m³/h (u ≈ 0.57 m/h at the storm), the demo's capacity before its pumps
    // were sized for the design storm: the rule of thumb's margin below the model's thickening
    // holds at this underflow rate. At the demo's 1150 m³/h (u ≈ 0.77 m/h) the limiting
    // underflow concentration falls below 1200/SVI (solids-flux theory, Keinath et al. 1977),
    // which is why the balance takes the lower of the two.
    const rasCap = 850;
    const plant = { ...DEMO_PLANT, trains: DEMO_PLANT.trains.map((t) => ({ ...t, pumps: t.pumps.map((p) => (p.kind === 'ras' ? { ...p, capacity_m3h: rasCap } : p)) })) };
    const sc = parseScenario(raw, plant);
    const m = new PlantModel(plant, sc, { seed: 1, splitImbalance: 0 });
    m.advanceTo(1.5);
    const dry = m.snapshot().trains[0]!;
    m.advanceTo(26);
    const a = m.snapshot().trains[0]!;
    m.advanceTo(28);
    const eq = m.snapshot().trains[0]!;
    // Equilibrium reached: MLSS changes by less than 0.1 % per hour, blanket inside the clarifier.
    expect(Math.abs(eq.mlss_gL - a.mlss_gL) / 2 / eq.mlss_gL).toBeLessThan(1e-3);
    expect(eq.blanketLevel_m).toBeLessThan(3.5);
    expect(eq.rasFlow_m3h).toBe(rasCap); // capped at the RAS pump capacity
    // The model's own clarifier balance at equilibrium (neglecting X_e·Q_e, ~1 %).
    const identity = (eq.underflowTss_gL * eq.rasFlow_m3h) / (eq.influentFlow_m3h + eq.rasFlow_m3h);
    expect(Math.abs(eq.mlss_gL - identity) / identity).toBeLessThan(0.02);

    const basin = DEMO_PLANT.trains[0]!.basins[0]!;
    const cl = DEMO_PLANT.trains[0]!.clarifiers[0]!;
    const p = stormProjection({
      influentFlow_m3h: dry.influentFlow_m3h,
      rasFlow_m3h: eq.influentFlow_m3h, // ratio control would ask for R = 1 …
      rasFlowCap_m3h: rasCap, // … but the pump is capped
      mlss_gL: dry.mlss_gL,
      svi_mLg: 150,
      aerationVolume_m3: basin.volume_m3,
      clarifierArea_m2: cl.area_m2,
      stormFlow_m3h: eq.influentFlow_m3h,
    });
    expect(p.value).not.toBeNull();
    const projected = p.value!.equilibriumMlss_gL;
    // Tolerance 20 %: the projection takes X_R,max = 1200/SVI, a rule of thumb that the design
    // notes as carrying about 20 % margin, while the model thickens to the Takács limiting
    // underflow concentration of its SVI-scaled settling curve. For healthy sludge (SVI ≤ 150)
    // these agree to about 10–15 %; with the margin the rule should sit at or below the model
    // (it is the conservative side), which is checked too.
    expect(Math.abs(eq.mlss_gL - projected) / projected).toBeLessThan(0.2);
    expect(projected).toBeLessThanOrEqual(eq.mlss_gL * 1.02);
    // And the storm did move sludge: the equilibrium is well below the dry-weather MLSS.
    expect(eq.mlss_gL).toBeLessThan(dry.mlss_gL - 0.2);
  });
});

describe('bulking', () => {
  it('thins the underflow and raises the blankets as SVI climbs', () => {
    const m = new PlantModel(DEMO_PLANT, loadScenario('bulking', DEMO_PLANT), { seed: 5 });
    m.advanceTo(6);
    const healthy = m.snapshot();
    m.advanceTo(60);
    const bulked = m.snapshot();
    expect(bulked.svi_mLg).toBeCloseTo(260, 6);
    for (let i = 0; i < 2; i++) {
      expect(bulked.trains[i]!.blanketLevel_m).toBeGreaterThan(healthy.trains[i]!.blanketLevel_m + 0.3);
    }
  });
});
