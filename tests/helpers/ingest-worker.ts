import { spawn, type ChildProcess } from 'node:child_process';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { INGEST_NODE_ARGS } from '../../ingest/config.ts';

const ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');

export interface IngestWorkerProcess {
  proc: ChildProcess;
  pid: number;
  /** stdout and stderr so far (warnings and errors; info goes to `<dataDir>/logs/ingest.log`). */
  output(): string;
  /** SIGKILL: no flush, no last heartbeat, no lease released — a crash. */
  kill(): Promise<void>;
  /** SIGTERM and the clean stop's exit code. */
  stop(): Promise<number | null>;
}

/** One ingest worker process as `npm start` and `npm run ingest` run it (ingest/main.ts), with its own data folder. */
export function spawnIngestWorker(env: Record<string, string>): IngestWorkerProcess {
  const proc = spawn(process.execPath, [...INGEST_NODE_ARGS, '--import', 'tsx', 'ingest/main.ts'], {
    cwd: ROOT,
    env: { PATH: process.env.PATH ?? '', LOG_LEVEL: 'info', ...env },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  let out = '';
  proc.stdout!.on('data', (b: Buffer) => (out += b.toString()));
  proc.stderr!.on('data', (b: Buffer) => (out += b.toString()));
  const exited = new Promise<number | null>((r) => proc.once('exit', (code) => r(code)));
  return {
    proc,
    pid: proc.pid!,
    output: () => out,
    async kill() {
      if (proc.exitCode === null && proc.signalCode === null) proc.kill('SIGKILL');
      await exited;
    },
    async stop() {
      if (proc.exitCode === null && proc.signalCode === null) proc.kill('SIGTERM');
      return exited;
    },
  };
}
