import { describe, expect, it } from 'vitest';
import { DEMO_PLANT } from '../../../simulators/plant/demo-plant.js';
import { PlantModel } from '../../../simulators/model/plant-model.js';
import { loadScenario } from '../../../simulators/scenarios/load-scenario.js';
import { folderPathOf } from '../../../simulators/protocols/opcua-server.js';

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
