import { setPriority } from 'node:os';
import { parentPort } from 'node:worker_threads';
import { isDomainValidationError } from '../../shared/domain/errors.ts';
import { offThreadCalcs, type CalcTask } from './calc-tasks.ts';

/**
 * One calculation worker of the pool (server/workers/worker-pool.ts): runs one task at a time
 * with the budget it carries; the deadline is read from this thread's monotonic clock, so the
 * solver stops (and answers `estimated`) before the pool's hard timeout would terminate it.
 */
const port = parentPort;
if (!port) throw new Error('calc.worker.ts runs as a worker thread only');

// The lowest CPU priority for this thread alone: on Linux the nice value belongs to the thread
// (setpriority(2), NOTES), and os.setPriority without a pid sets the caller's. A solver that
// runs to its budget then never keeps the API's request thread waiting for a core. Where the
// platform does not allow it the worker runs at normal priority.
try {
  setPriority(19);
} catch {
  // not permitted here: normal priority
}

port.on('message', ({ id, task }: { id: number; task: CalcTask }) => {
  try {
    const fn = offThreadCalcs[task.name] as (body: unknown, b: Parameters<(typeof offThreadCalcs)['settler']>[1]) => unknown;
    if (!fn) throw new Error(`no off-thread calculator ${String(task.name)}`);
    const now = () => performance.now();
    const value = fn(task.body, { maxSteps: task.maxSteps, deadline_ms: now() + task.budget_ms, now });
    port.postMessage({ id, ok: true, value });
  } catch (err) {
    const e = err instanceof Error ? err : new Error(String(err));
    port.postMessage({ id, ok: false, error: { name: e.name, message: e.message, ...(isDomainValidationError(e) ? { field: e.field } : {}) } });
  }
});
port.postMessage({ ready: true });
