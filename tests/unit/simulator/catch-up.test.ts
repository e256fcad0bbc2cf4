import { afterEach, describe, expect, it } from 'vitest';
import { startSimulator, type RunningSimulator } from '../../../simulators/simulator.ts';
import { waitFor } from '../../helpers/wait.ts';

describe('simulator catch-up mode', () => {
  let sim: RunningSimulator | undefined;
  afterEach(async () => sim?.stop());

  it('runs fast from the past but never puts the simulated clock ahead of the wall clock', async () => {
    sim = await startSimulator({ scenario: 'demo', speed: 3600, catchUp_h: 0.5, mqttUrl: null, opcuaPort: null, tick_ms: 20 });
    const t0 = sim.simulatedNow().getTime();
    expect(Date.now() - t0).toBeGreaterThan(0.49 * 3_600_000);
    // At 3600× half an hour passes in half a real second: poll until it caught up (within one
    // model step of 5 s and a tick), checking at every look that it never ran ahead.
    const ahead: number[] = [];
    const lag_ms = await waitFor(
      () => {
        const s = sim!.simulatedNow().getTime();
        const now = Date.now();
        if (s > now) ahead.push(s - now);
        return now - s;
      },
      (lag) => lag < 10_000,
      { timeout_ms: 15_000, every_ms: 10, what: 'catching up with the wall clock' },
    );
    expect(lag_ms).toBeGreaterThanOrEqual(0);
    expect(ahead).toEqual([]);
  });
});
