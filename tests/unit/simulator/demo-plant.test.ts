import { describe, expect, it } from 'vitest';
import { DEMO_PLANT } from '../../../simulators/plant/demo-plant.js';
import { PlantModel } from '../../../simulators/model/plant-model.js';
import { loadScenario } from '../../../simulators/scenarios/load-scenario.js';
import { folderPathOf } from '../../../simulators/protocols/opcua-server.js';
import { kestrelBendConfig } from '../../../simulators/plant/kestrel-bend.config.js';
import { rasConcMaxFlux_gL } from '../../../shared/domain/flux.js';
import { minRecycleRatio } from '../../../shared/domain/ras-margin.js';
import { vesilindFromIndex } from '../../../shared/domain/settling.js';

describe('DEMO_PLANT', () => {
  it('has unique tag names and addresses in the documented formats', () => {
    const names = DEMO_PLANT.tags.map((t) => t.name);
    expect(new Set(names).size).toBe(names.length);
    expect(new Set(DEMO_PLANT.tags.map((t) => t.address)).size).toBe(names.length);
    for (const t of DEMO_PLANT.tags) {
      expect(t.name).toMatch(/^(FIT|AIT|LIT|YI)-\d{3}$/);
      if (t.protocol === 'mqtt') expect(t.address).toMatch(new RegExp(`^kb/[a-z0-9]+/${t.name}$`));
      else expect(t.address).toMatch(new RegExp(`^ns=1;s=kb\\.(plant|train[12])\\.${t.name}$`));
      expect(t.rangeHigh).toBeGreaterThan(t.rangeLow);
      expect(t.expectedPeriod_s).toBeGreaterThan(0);
    }
    // Both protocols are in use, as in a real plant.
    expect(DEMO_PLANT.tags.filter((t) => t.protocol === 'mqtt').length).toBeGreaterThan(3);
    expect(DEMO_PLANT.tags.filter((t) => t.protocol === 'opcua').length).toBeGreaterThan(3);
  });

  it('points every signal at an existing plant, basin, clarifier or pump, and the model can produce it', () => {
    const codes = new Set([DEMO_PLANT.code, ...DEMO_PLANT.trains.flatMap((t) => [...t.basins, ...t.clarifiers, ...t.pumps].map((u) => u.code))]);
    const model = new PlantModel(DEMO_PLANT, loadScenario('dry-weather', DEMO_PLANT), { seed: 1 });
    model.advanceTo(0.5);
    for (const t of DEMO_PLANT.tags) {
      expect(codes.has(t.signal.target), t.name).toBe(true);
      const v = model.signalValue(t.signal.kind, t.signal.target);
      expect(Number.isFinite(v), t.name).toBe(true);
      // The true value lies inside the transmitter's range in dry weather.
      expect(v).toBeGreaterThanOrEqual(t.rangeLow);
      expect(v).toBeLessThanOrEqual(t.rangeHigh);
      // OPC UA folder: plant-wide tags at the top, the rest under their train and unit.
      if (t.protocol === 'opcua') expect(folderPathOf(DEMO_PLANT, t).length).toBe(t.signal.target === 'kb' ? 0 : 2);
    }
  });
});

describe('Kestrel Bend design basis (Modified Ludzack-Ettinger, two trains)', () => {
  const dry = loadScenario('dry-weather', DEMO_PLANT);
  // Average dry-weather flow of one train: half the plant's.
  const qTrain = dry.influent.averageFlow_m3h / DEMO_PLANT.trains.length;

  it('has one anoxic zone per train, sized within the usual MLE ranges, and the configuration document carries it', () => {
    const cfg = kestrelBendConfig({ mqttUrl: 'mqtt://127.0.0.1:1', opcuaUrl: 'opc.tcp://127.0.0.1:2' });
    for (const [i, t] of DEMO_PLANT.trains.entries()) {
      expect(t.basins).toHaveLength(1);
      const b = t.basins[0]!;
      expect(b.aeratedFraction).toBeGreaterThan(0);
      expect(b.aeratedFraction).toBeLessThan(1);
      // Metcalf & Eddy 5th ed., MLE design parameters [M: from memory]: anoxic τ 1–3 h, aerobic τ 4–12 h.
      const anoxic_h = ((1 - b.aeratedFraction) * b.volume_m3) / qTrain;
      const aerobic_h = (b.aeratedFraction * b.volume_m3) / qTrain;
      expect(anoxic_h).toBeGreaterThanOrEqual(1);
      expect(anoxic_h).toBeLessThanOrEqual(3);
      expect(aerobic_h).toBeGreaterThanOrEqual(4);
      expect(aerobic_h).toBeLessThanOrEqual(12);
      // The product sees the same basin: whole volume and its aerated share.
      expect(cfg.model.trains[i]!.aerationBasins[0]).toMatchObject({ code: b.code, volume_m3: b.volume_m3, aeratedFraction: b.aeratedFraction });
    }
  });

  it('keeps the solids of the whole basin volume, anoxic zone included, in the model and in the product', () => {
    const m = new PlantModel(DEMO_PLANT, dry, { seed: 3 });
    m.advanceTo(2);
    const s = m.snapshot();
    let inventory = 0;
    for (const [i, t] of s.trains.entries()) {
      const v = DEMO_PLANT.trains[i]!.basins[0]!.volume_m3;
      // Basin mass = X × the whole volume (7500 m³), as the balance computes it from the MLSS probe.
      expect(t.basinMass_kg).toBeCloseTo(t.mlss_gL * v, 6);
      inventory += t.basinMass_kg + t.clarifierMass_kg;
    }
    expect(m.inventory_kg()).toBeCloseTo(inventory, 6);
  });

  it('sizes the RAS pumps for the design storm: R_min·Q at twice the average flow is within capacity (flux theory, SVI 120)', () => {
    // The demo's sludge (its history and its lab entry): SVI 120 mL/g, settling by Härtel & Pöpel (1992).
    expect(dry.svi.initial_mLg).toBe(120);
    const ves = vesilindFromIndex(120, 'haertel-poepel-1992').value!;
    const storm = 2 * qTrain;
    const mlss = dry.initial.mlss_gL;
    for (const t of DEMO_PLANT.trains) {
      const cap = t.pumps.find((p) => p.kind === 'ras')!.capacity_m3h;
      const area = t.clarifiers.reduce((a, c) => a + c.area_m2 * c.count, 0);
      // Underflow rate with the pumps at capacity; X_R,max the lower of flux theory G_L/u (Keinath et al. 1977) and 1200/SVI [CP].
      const xrMax = Math.min(rasConcMaxFlux_gL(cap / area, ves).value!, 1200 / 120);
      const rMin = minRecycleRatio(mlss, xrMax).value!;
      // Q_R,min = R_min·Q_storm ≈ 3.45/(8.4 − 3.45)·1540 ≈ 1070 m³/h below 1150 m³/h.
      expect(rMin * storm).toBeLessThan(cap);
      // … and ratio control (RAS = Q) fits the diurnal peak of dry weather (1 + 0.25 + 0.06 of the mean, the scenario's harmonics).
      const peak = qTrain * (1 + dry.influent.diurnal.amplitude + dry.influent.diurnal.secondAmplitude);
      expect(dry.ras.ratio * peak).toBeLessThan(cap);
    }
  });
});
