import { describe, expect, it } from 'vitest';
import { settlerRequest } from '../../../shared/contracts/calc.js';
import { createCalcService } from '../../../server/services/calc.service.js';
import { HttpError, TooManyRequestsError } from '../../../server/http/errors.js';
import { createWorkerPool, PoolFullError } from '../../../server/workers/worker-pool.js';

const entry = new URL('../../../server/workers/calc.worker.ts', import.meta.url);
const BSM1 = settlerRequest.parse({ feedFlow_m3h: 36892 / 24, feedTss_gL: 3.26984, underflowFlow_m3h: 18831 / 24, area_m2: 1500, depth_m: 4 });
const STILL = settlerRequest.parse({ feedFlow_m3h: 0, feedTss_gL: 3, underflowFlow_m3h: 0, area_m2: 1500, depth_m: 4, layers: 100, feedLayer: 50 });

describe('calculation worker pool', () => {
  it('runs the settler in a worker: BSM1 converges (good), the still column stops at its budget (estimated)', async () => {
    const pool = createWorkerPool({ entry, size: 1, queue: 4, timeout_ms: 30_000 });
    const calc = createCalcService({ pool, limits: { budget_ms: 300, timeout_ms: 30_000, settlerMaxSteps: 200_000 } });
    try {
      const good = await calc.run('settler', BSM1);
      expect(good.quality).toBe('good');
      // BSM1 open-loop underflow 6 393.98 g/m³ (Alex et al. 2008), within 1 %.
      expect(Math.abs(good.underflowTss_gL! - 6.3939844) / 6.3939844).toBeLessThan(0.01);
      const still = await calc.run('settler', STILL);
      expect(still.quality).toBe('estimated');
      expect(still.reasons?.join()).toMatch(/steady state not reached/);
    } finally {
      await pool.close();
    }
  });

  it('refuses a task beyond the workers and the queue at once (429), and terminates a task past the hard timeout (503)', async () => {
    // A step budget and a time budget far beyond the hard timeout: only terminate() can stop it.
    const pool = createWorkerPool({ entry, size: 1, queue: 1, timeout_ms: 400 });
    const calc = createCalcService({ pool, limits: { budget_ms: 60_000, timeout_ms: 400, settlerMaxSteps: 10_000_000 } });
    try {
      const first = calc.run('settler', STILL);
      const second = calc.run('settler', STILL);
      await expect(pool.run({ name: 'settler', body: STILL, budget_ms: 1, maxSteps: 1 })).rejects.toBeInstanceOf(PoolFullError);
      await expect(calc.run('settler', STILL)).rejects.toBeInstanceOf(TooManyRequestsError);
      const e1 = await first.catch((e: unknown) => e);
      expect(e1).toBeInstanceOf(HttpError);
      expect(e1).toMatchObject({ status: 503, code: 'calc_timeout' });
      await expect(second).rejects.toMatchObject({ status: 503, code: 'calc_timeout' });
      // The pool recovers with a fresh worker.
      await expect(pool.run({ name: 'settler', body: BSM1, budget_ms: 5_000, maxSteps: 10 })).resolves.toMatchObject({ quality: 'estimated' });
    } finally {
      await pool.close();
    }
  });

  it('a domain validation error in the worker is the same typed error (422 field) on the caller side', async () => {
    const pool = createWorkerPool({ entry, size: 1, queue: 1, timeout_ms: 10_000 });
    try {
      const bad = pool.run({ name: 'settler', body: { ...BSM1, underflowFlow_m3h: BSM1.feedFlow_m3h + 1 }, budget_ms: 100, maxSteps: 10 });
      await expect(bad).rejects.toMatchObject({ name: 'DomainValidationError', field: 'underflowFlow_m3h' });
      await expect(pool.run({ name: 'settler', body: BSM1, budget_ms: 100, maxSteps: 0 })).resolves.toMatchObject({ quality: 'estimated' });
    } finally {
      await pool.close();
    }
  });
});
