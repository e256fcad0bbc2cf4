import { afterEach, describe, expect, it } from 'vitest';
import { startSimulator, type RunningSimulator } from '../../../simulators/simulator.ts';

describe('simulator catch-up mode', () => {
  let sim: RunningSimulator | undefined;
  afterEach(async () => sim?.stop());

  it('runs fast from the past but never puts the simulated clock ahead of the wall clock', async () => {
    sim = await startSimulator({ scenario: 'demo', speed: 3600, catchUp_h: 0.5, mqttUrl: null, opcuaPort: null, tick_ms: 20 });
    const t0 = sim.simulatedNow().getTime();
    expect(Date.now() - t0).toBeGreaterThan(0.49 * 3_600_000);
    // At 3600× half an hour passes in half a real second; wait well past it.
    await new Promise((r) => setTimeout(r, 1500));
    const now = Date.now();
    const sim_t = sim.simulatedNow().getTime();
    expect(sim_t).toBeLessThanOrEqual(now);
    // Caught up to within one model step (5 s) and a tick.
    expect(now - sim_t).toBeLessThan(10_000);
  });
});
