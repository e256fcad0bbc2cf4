import { Worker } from 'node:worker_threads';

/**
 * A small pool of worker threads for CPU-bound work that must not block the API's event loop
 * (Node.js docs, "Worker threads"; "Don't block the event loop" guide). Each worker runs one task
 * at a time; tasks beyond the busy workers wait in a bounded queue, and one more is refused at
 * once (`PoolFullError`) instead of piling up. A task that runs longer than `timeout_ms` has its
 * worker terminated (`worker.terminate()` stops even a tight loop) and fails with
 * `PoolTimeoutError`; the next task gets a fresh worker. Workers are started at once
 * (`prestart`) or on demand, and unref'd, so an idle pool keeps no process alive.
 *
 * Protocol with the entry module: it posts `{ ready: true }` once loaded, then answers each
 * `{ id, task }` with `{ id, ok: true, value }` or `{ id, ok: false, error: { name, message, field? } }`.
 */
export interface WorkerPoolOptions {
  /** The worker's module (a .ts file, loaded through ts-worker-boot.mjs). */
  entry: URL;
  size: number;
  /** Tasks that may wait for a worker; one more is refused. */
  queue: number;
  /** Hard limit per task from the moment a worker takes it [ms]. */
  timeout_ms: number;
  /** Heap limit per worker [MB]. */
  maxHeap_MB?: number;
  /** Start the workers now instead of on the first task (a worker takes a while to start on a busy host). */
  prestart?: boolean;
}

export class PoolFullError extends Error {
  override name = 'PoolFullError';
}
export class PoolTimeoutError extends Error {
  override name = 'PoolTimeoutError';
}
/** The worker failed (crashed, ran out of memory, exited): not the task's own error. */
export class WorkerFailedError extends Error {
  override name = 'WorkerFailedError';
}
/** An error the task threw in the worker, with its name, message and (domain validation) field. */
export class TaskError extends Error {
  constructor(
    override readonly name: string,
    message: string,
    readonly field?: string,
  ) {
    super(message);
  }
}

interface Job {
  id: number;
  task: unknown;
  resolve: (v: unknown) => void;
  reject: (e: Error) => void;
}

interface Slot {
  worker: Worker;
  ready: boolean;
  job: Job | null;
  timer: NodeJS.Timeout | null;
}

type Reply = { ready: true } | { id: number; ok: true; value: unknown } | { id: number; ok: false; error: { name: string; message: string; field?: string } };

const BOOT = new URL('./ts-worker-boot.mjs', import.meta.url);

export function createWorkerPool(opts: WorkerPoolOptions) {
  const slots = new Set<Slot>();
  const waiting: Job[] = [];
  let nextId = 1;
  let closed = false;

  function finish(slot: Slot): Job | null {
    const job = slot.job;
    if (slot.timer) clearTimeout(slot.timer);
    slot.job = null;
    slot.timer = null;
    return job;
  }

  function drop(slot: Slot, err: Error): void {
    if (!slots.delete(slot)) return;
    finish(slot)?.reject(err);
    void slot.worker.terminate();
    pump();
  }

  function spawn(): Slot {
    const worker = new Worker(BOOT, {
      workerData: { entry: opts.entry.href },
      resourceLimits: { maxOldGenerationSizeMb: opts.maxHeap_MB ?? 64 },
    });
    worker.unref();
    const slot: Slot = { worker, ready: false, job: null, timer: null };
    worker.on('message', (m: Reply) => {
      if ('ready' in m) {
        slot.ready = true;
        pump();
        return;
      }
      if (slot.job?.id !== m.id) return;
      const job = finish(slot)!;
      if (m.ok) job.resolve(m.value);
      else job.reject(new TaskError(m.error.name, m.error.message, m.error.field));
      pump();
    });
    worker.on('error', (err) => drop(slot, new WorkerFailedError(`calculation worker failed: ${err.message}`)));
    worker.on('exit', (code) => drop(slot, new WorkerFailedError(`calculation worker exited with code ${code}`)));
    slots.add(slot);
    return slot;
  }

  function start(slot: Slot, job: Job): void {
    slot.job = job;
    slot.timer = setTimeout(() => drop(slot, new PoolTimeoutError(`stopped after ${opts.timeout_ms} ms`)), opts.timeout_ms);
    slot.timer.unref();
    slot.worker.postMessage({ id: job.id, task: job.task });
  }

  /** Hands waiting tasks to idle ready workers, and starts workers up to the pool size while tasks wait. */
  function pump(): void {
    if (closed) return;
    for (const slot of slots) {
      if (!waiting.length) return;
      if (slot.ready && !slot.job) start(slot, waiting.shift()!);
    }
    const starting = [...slots].filter((s) => !s.ready).length;
    for (let n = slots.size; n < opts.size && waiting.length > starting; n++) spawn();
  }

  if (opts.prestart) for (let n = 0; n < opts.size; n++) spawn();

  return {
    /** Runs one task; rejects with PoolFullError at once when every worker is busy and the queue is full. */
    run(task: unknown): Promise<unknown> {
      if (closed) return Promise.reject(new WorkerFailedError('the calculation pool is closed'));
      const busy = [...slots].filter((s) => s.job).length;
      const idleSlots = opts.size - busy;
      if (waiting.length >= idleSlots + opts.queue) return Promise.reject(new PoolFullError('every calculation worker is busy and the queue is full'));
      return new Promise((resolve, reject) => {
        waiting.push({ id: nextId++, task, resolve, reject });
        pump();
      });
    },
    /** Tasks running and waiting (for tests and status). */
    load: () => ({ running: [...slots].filter((s) => s.job).length, waiting: waiting.length, workers: slots.size }),
    async close(): Promise<void> {
      closed = true;
      for (const j of waiting.splice(0)) j.reject(new WorkerFailedError('the calculation pool is closed'));
      await Promise.all([...slots].map(async (s) => {
        slots.delete(s);
        finish(s)?.reject(new WorkerFailedError('the calculation pool is closed'));
        await s.worker.terminate();
      }));
    },
  };
}
export type WorkerPool = ReturnType<typeof createWorkerPool>;
