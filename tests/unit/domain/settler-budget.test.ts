import { describe, expect, it } from 'vitest';
import { calcSettler } from '../../../shared/domain/calculators.js';
import { settlerRequest } from '../../../shared/contracts/calc.js';
import { BSM1_SETTLER, solveSettlerSteadyState } from '../../../shared/domain/settler.js';

// BSM1 open-loop feed (Alex et al. 2008, BSM1 technical report): Qf = 36 892 m³/d, Xf = 3 269.84 g/m³, Qu = 18 831 m³/d.
const BSM1_OL_FEED = { feedFlow_m3h: 36892 / 24, feedTss_gL: 3.26984, underflowFlow_m3h: 18831 / 24 };
// The input that blocked the API for 13.8 s (issue 15): no flow at all, 100 layers. With no feed
// flux the solve's convergence scale is the 1e-9 floor, so it runs to whatever budget it gets.
const STILL = settlerRequest.parse({ feedFlow_m3h: 0, feedTss_gL: 3, underflowFlow_m3h: 0, area_m2: 1500, depth_m: 4, layers: 100, feedLayer: 50 });

describe('settler steady state under a work and time budget', () => {
  it('stops at the step budget and says so; the BSM1 case still converges within a budget of 200 000 steps', () => {
    const capped = solveSettlerSteadyState(BSM1_SETTLER, BSM1_OL_FEED, { maxIter: 100 });
    expect(capped).toMatchObject({ converged: false, stop: 'iterations', iterations: 100 });
    const full = solveSettlerSteadyState(BSM1_SETTLER, BSM1_OL_FEED, { maxIter: 200_000 });
    expect(full.stop).toBe('converged');
    expect(full.iterations).toBeLessThan(200_000);
  });

  it('stops at the deadline of an injected clock (read every 256 steps), not at the step budget', () => {
    let reads = 0;
    // A clock that advances 1 ms per read: the deadline 10 ms ahead passes on the 11th read.
    const now = () => reads++;
    const r = solveSettlerSteadyState({ ...BSM1_SETTLER, layers: 100, feedLayer: 50 }, { feedFlow_m3h: 0, feedTss_gL: 3, underflowFlow_m3h: 0 }, { maxIter: 10_000_000, deadline: { now, deadline_ms: 10 } });
    expect(r.stop).toBe('deadline');
    expect(reads).toBe(11);
    expect(r.iterations).toBe(10 * 256);
  });

  it('the calculator answers a budget-stopped solve as estimated with the reason, never good', () => {
    const byTime = calcSettler(STILL, { maxIter: 10_000_000, deadline: { now: (() => { let t = 0; return () => (t += 5); })(), deadline_ms: 20 } });
    expect(byTime.quality).toBe('estimated');
    expect(byTime.reasons?.join()).toMatch(/steady state not reached \(the time budget ran out after \d+ steps\)/);
    expect(byTime.layers_gL).toHaveLength(100);
    const bySteps = calcSettler(STILL, { maxIter: 1000 });
    expect(bySteps.quality).toBe('estimated');
    expect(bySteps.reasons?.join()).toMatch(/the budget of 1000 steps ran out/);
    // Solids are conserved while the column settles (no flow in or out): Σ X·h stays 3 g/L × 4 m.
    const mass = bySteps.layers_gL.reduce((a, x) => a + x * (4 / 100), 0);
    expect(mass).toBeCloseTo(3 * 4, 6);
  });
});
