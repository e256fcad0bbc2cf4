import { DomainValidationError } from '../../shared/domain/errors.ts';
import { HttpError, TooManyRequestsError } from '../http/errors.ts';
import type { CalcInput, CalcOutput, CalcTask, OffThreadCalc } from '../workers/calc-tasks.ts';
import { PoolFullError, PoolTimeoutError, TaskError, WorkerFailedError, type WorkerPool } from '../workers/worker-pool.ts';

export interface CalcLimits {
  /** Time the solver may spend before it answers its last iterate as estimated [ms]. */
  budget_ms: number;
  /** Hard limit after which the worker is terminated [ms] (the pool's timeout; for messages). */
  timeout_ms: number;
  /** Step budget of the settler's steady-state solve. */
  settlerMaxSteps: number;
}

export interface CalcServiceDeps {
  pool: Pick<WorkerPool, 'run'>;
  limits: CalcLimits;
}

/**
 * Heavy calculators off the request thread: each runs in the worker pool with an iteration and
 * time budget (a solve that stops early answers `estimated` with the reason); a full pool is a
 * 429 with Retry-After, a task past the hard timeout a 503 (its worker is terminated), and a
 * domain validation error from the worker the same 422 as on the request thread.
 */
export function createCalcService({ pool, limits }: CalcServiceDeps) {
  return {
    async run<K extends OffThreadCalc>(name: K, body: CalcInput<K>): Promise<CalcOutput<K>> {
      const task: CalcTask = { name, body, budget_ms: limits.budget_ms, maxSteps: limits.settlerMaxSteps };
      try {
        return (await pool.run(task)) as CalcOutput<K>;
      } catch (err) {
        if (err instanceof PoolFullError) throw new TooManyRequestsError('the calculators are busy; try again in a moment', 1);
        if (err instanceof PoolTimeoutError) throw new HttpError(503, 'calc_timeout', `the calculation did not finish within ${limits.timeout_ms} ms and was stopped`);
        if (err instanceof WorkerFailedError) throw new HttpError(503, 'calc_unavailable', 'the calculation worker failed; try again');
        if (err instanceof TaskError && err.name === 'DomainValidationError' && err.field) throw new DomainValidationError(err.field, err.message);
        throw err;
      }
    },
  };
}
export type CalcService = ReturnType<typeof createCalcService>;
