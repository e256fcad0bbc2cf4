import { spawn, type ChildProcess } from 'node:child_process';
import path from 'node:path';
import readline from 'node:readline';

/**
 * The terminal shows what a person starting the product needs: pino lines below warn are not
 * echoed (the API and ingest write every line to their own file, `<dataDir>/logs/server.log`
 * and `<dataDir>/logs/ingest.log`, and only warnings and errors to stderr), and node-opcua's
 * notice about Node 20's RSA PKCS#1 v1.5 revert flag (NODE-OPCUA-W27; we use no PKCS#1 v1.5
 * padding) is dropped.
 */
let skipNext = false;
function keepLine(line: string): boolean {
  if (skipNext) {
    skipNext = false;
    if (line.includes('--security-revert')) return false;
  }
  if (line.includes('NODE-OPCUA-W27')) {
    skipNext = true;
    return false;
  }
  if (line.startsWith('{"level":')) {
    const level = Number(/^\{"level":(\d+)/.exec(line)?.[1] ?? 50);
    return level >= 40;
  }
  return true;
}

export interface Child {
  name: string;
  proc: ChildProcess;
  stop(): Promise<void>;
}

/**
 * Runs a TypeScript entry point as its own Node process (`node --import tsx`, one process, so a
 * stop reaches it directly), prefixing its output lines with its name. stop() sends SIGTERM,
 * waits up to `grace_ms` for a clean exit (ingest flushes), then SIGKILL.
 */
export function spawnTs(
  root: string,
  name: string,
  entry: string,
  args: string[],
  env: Record<string, string>,
  onExit?: (code: number | null) => void,
  nodeArgs: readonly string[] = [],
): Child {
  const proc = spawn(process.execPath, [...nodeArgs, '--import', 'tsx', path.join(root, entry), ...args], {
    cwd: root,
    // The launcher passes its environment on, with the child's own settings over it.
    env: { ...process.env, ...env },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  for (const stream of [proc.stdout, proc.stderr]) {
    if (stream) readline.createInterface({ input: stream }).on('line', (l) => keepLine(l) && console.log(`[${name}] ${l}`));
  }
  let exited = false;
  const done = new Promise<void>((resolve) =>
    proc.once('exit', (code) => {
      exited = true;
      onExit?.(code);
      resolve();
    }),
  );
  return {
    name,
    proc,
    async stop(grace_ms = 10_000) {
      if (exited) return;
      proc.kill('SIGTERM');
      const t = setTimeout(() => proc.kill('SIGKILL'), grace_ms);
      await done;
      clearTimeout(t);
    },
  };
}

/**
 * Resolves with the match of the first stdout line of a child process that matches `re`; rejects
 * if the process exits first or nothing matches within `timeout_ms`. `name` is for the messages.
 */
export function waitForLine(proc: ChildProcess, name: string, re: RegExp, timeout_ms = 30_000): Promise<RegExpMatchArray> {
  return new Promise((resolve, reject) => {
    const lines = readline.createInterface({ input: proc.stdout! });
    const onLine = (l: string) => {
      const m = re.exec(l);
      if (m) finish(null, m);
    };
    // Detach, not close(): closing a readline interface pauses its input, and the child's other
    // reader (its log lines) would stop — and a child blocks once its stdout pipe is full.
    const finish = (err: Error | null, m?: RegExpMatchArray) => {
      clearTimeout(t);
      lines.off('line', onLine);
      proc.off('exit', onExit);
      if (err) reject(err);
      else resolve(m!);
    };
    const onExit = (code: number | null) => finish(new Error(`${name} exited (code ${code}) before it was ready`));
    const t = setTimeout(() => finish(new Error(`${name} was not ready within ${timeout_ms / 1000} s`)), timeout_ms);
    proc.once('exit', onExit);
    lines.on('line', onLine);
  });
}

/** Restart backoff of a supervised child: 1 s, doubling to 30 s; back to 1 s once a run lasted a minute. */
export const RESTART_BACKOFF = { first_ms: 1000, max_ms: 30_000, stable_ms: 60_000 } as const;

export interface SupervisedChild {
  name: string;
  /** The process running now (a new one after each restart). */
  readonly proc: ChildProcess;
  readonly restarts: number;
  /** No restart from now on (a pending one is cancelled); the running process is left to end. */
  halt(): void;
  stop(): Promise<void>;
}

export interface ChildExit {
  name: string;
  code: number | null;
  signal: NodeJS.Signals | null;
  /** How long the process had run [ms]. */
  ran_ms: number;
  /** When it is started again [ms from now]. */
  restartIn_ms: number;
  restarts: number;
}

/**
 * spawnTs under a supervisor: when the process exits and no stop was asked for, it is started
 * again after a backoff (RESTART_BACKOFF) and `onExit` is told (the launcher raises an alarm).
 * stop() cancels a pending restart and stops the running process.
 */
export function superviseTs(
  root: string,
  name: string,
  entry: string,
  args: string[],
  env: Record<string, string>,
  onExit: (e: ChildExit) => void,
  nodeArgs: readonly string[] = [],
  clock: () => number = Date.now,
): SupervisedChild {
  let stopping = false;
  let restarts = 0;
  let delay_ms: number = RESTART_BACKOFF.first_ms;
  let timer: NodeJS.Timeout | null = null;
  let current: Child;
  const start = () => {
    const startedAt = clock();
    current = spawnTs(
      root,
      name,
      entry,
      args,
      env,
      (code) => {
        if (stopping) return;
        const ran_ms = clock() - startedAt;
        if (ran_ms >= RESTART_BACKOFF.stable_ms) delay_ms = RESTART_BACKOFF.first_ms;
        const wait = delay_ms;
        delay_ms = Math.min(delay_ms * 2, RESTART_BACKOFF.max_ms);
        restarts++;
        onExit({ name, code, signal: current.proc.signalCode, ran_ms, restartIn_ms: wait, restarts });
        timer = setTimeout(() => {
          timer = null;
          if (!stopping) start();
        }, wait);
      },
      nodeArgs,
    );
  };
  start();
  return {
    name,
    get proc() {
      return current.proc;
    },
    get restarts() {
      return restarts;
    },
    halt() {
      stopping = true;
      if (timer) clearTimeout(timer);
    },
    async stop() {
      this.halt();
      await current.stop();
    },
  };
}
