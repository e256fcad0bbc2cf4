import type { SettlerRequest, SettlerResponse } from '../../shared/contracts/calc.ts';
import { calcSettler } from '../../shared/domain/calculators.ts';

/**
 * The budget a calculation runs under: at most `maxSteps` solver steps, and no new step after
 * `now() ≥ deadline_ms`. The worker sets both from the API's configuration and its own clock.
 */
export interface CalcBudget {
  maxSteps: number;
  deadline_ms: number;
  now: () => number;
}

/**
 * Calculators that run in the worker pool (server/workers/calc.worker.ts), because their worst
 * case is far beyond a few milliseconds. Measured on the development machine (2 cores, shared):
 * the settler takes 30 ms (BSM1, 10 layers) to 100 ms (100 layers) when it converges and, before
 * it had a budget, 13.8 s with zero flows and 100 layers; state point ≤ 1 ms, storm, SRT and SVI
 * ≤ 0.05 ms, so those stay on the request thread. A calculator added here gets the pool, the
 * queue limit and the hard timeout without more code.
 */
export const offThreadCalcs = {
  settler: (req: SettlerRequest, b: CalcBudget): SettlerResponse => calcSettler(req, { maxIter: b.maxSteps, deadline: { now: b.now, deadline_ms: b.deadline_ms } }),
};
export type OffThreadCalc = keyof typeof offThreadCalcs;
export type CalcInput<K extends OffThreadCalc> = Parameters<(typeof offThreadCalcs)[K]>[0];
export type CalcOutput<K extends OffThreadCalc> = ReturnType<(typeof offThreadCalcs)[K]>;

/** What the API posts to a worker for one calculation. */
export interface CalcTask {
  name: OffThreadCalc;
  body: unknown;
  budget_ms: number;
  maxSteps: number;
}
