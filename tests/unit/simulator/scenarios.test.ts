import { describe, expect, it } from 'vitest';
import { listScenarios, loadScenario, parseScenario, ScenarioError } from '../../../simulators/scenarios/load-scenario.js';
import { DEMO_PLANT } from '../../../simulators/plant/demo-plant.js';

describe('scenario files', () => {
  it('ships the six scenarios and each validates against the schema and the plant', () => {
    expect(listScenarios()).toEqual(['bulking', 'demo', 'dry-weather', 'probe-fouling', 'ras-pump-trip', 'storm']);
    for (const name of listScenarios()) expect(loadScenario(name, DEMO_PLANT).name).toBe(name);
  });

  it('has the demo storm within the first minutes at its recommended speed', () => {
    const demo = loadScenario('demo', DEMO_PLANT);
    const firstStorm_h = Math.min(...demo.influent.storms.map((s) => s.start_h));
    const realMinutes = (firstStorm_h * 60) / demo.recommendedSpeed;
    expect(realMinutes).toBeLessThanOrEqual(2);
  });

  it('rejects unknown tags, unknown pumps, bad values and unknown names with readable issues', () => {
    const base = loadScenario('dry-weather', DEMO_PLANT);
    const bad = { ...base, faults: [{ tag: 'AIT-999', kind: 'spike', at_h: 1, duration_h: 1, magnitude: 3 }], ras: { ...base.ras, trips: [{ pump: 'was1', at_h: 1, duration_h: 1 }] } };
    try {
      parseScenario(bad, DEMO_PLANT);
      expect.unreachable();
    } catch (e) {
      expect(e).toBeInstanceOf(ScenarioError);
      expect((e as ScenarioError).issues).toEqual([
        'faults.0.tag: no tag "AIT-999" in kb',
        'ras.trips.0.pump: no RAS pump "was1" in kb',
      ]);
    }
    expect(() => parseScenario({ ...base, initial: { mlss_gL: -1 } }, DEMO_PLANT)).toThrow(/initial\.mlss_gL/);
    expect(() => parseScenario({ ...base, faults: [{ tag: 'AIT-111', kind: 'drift', at_h: 1, duration_h: 1 }] }, DEMO_PLANT)).toThrow(/magnitude: required/);
    expect(() => loadScenario('hurricane', DEMO_PLANT)).toThrow(/unknown scenario "hurricane"/);
  });
});
