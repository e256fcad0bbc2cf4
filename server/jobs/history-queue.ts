import type { AppContext } from '../app-context.ts';

/** The part of the BullMQ queue the import service uses. */
export interface HistoryQueue {
  add(name: string, data: { id: number }, opts?: object): Promise<unknown>;
}

/**
 * The history queue of each context whose worker runs (server/jobs/history-jobs.ts registers
 * it); kept apart from the worker so the composition root can name it without importing the
 * jobs (which import the composition root).
 */
const queues = new WeakMap<AppContext, HistoryQueue>();

export function registerHistoryQueue(ctx: AppContext, q: HistoryQueue | null): void {
  if (q) queues.set(ctx, q);
  else queues.delete(ctx);
}

/** Puts a history job on this context's queue; false when no history worker runs here. */
export async function enqueueHistoryJob(ctx: AppContext, kind: 'import' | 'recompute', id: number): Promise<boolean> {
  const q = queues.get(ctx);
  if (!q) return false;
  // The time in the id: a recompute stopped by a shutdown is queued again under a new id at the next start.
  await q.add(kind, { id }, { jobId: `${kind}-${id}-${Date.now()}`, removeOnComplete: 1000, removeOnFail: 1000 });
  return true;
}
