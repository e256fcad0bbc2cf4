import { spawn, type ChildProcess } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');

export interface ApiProcess {
  child: ChildProcess;
  /** http://127.0.0.1:<port> */
  url: string;
  /** Its own FLOCSTREAM_DATA_DIR (a temporary folder, removed by stopApiProcess). */
  dataDir: string;
}

/**
 * One API process as `npm start` runs it (tests/helpers/api-child.ts), configured by `env` on top
 * of this process's environment, with a data folder of its own; `jobs` adds the balance engine
 * and the history worker. Resolves once it listens.
 */
export async function startApiProcess(env: Record<string, string>, opts: { jobs?: boolean } = {}): Promise<ApiProcess> {
  const dataDir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-api-'));
  const child = spawn(process.execPath, ['--import', 'tsx', 'tests/helpers/api-child.ts', ...(opts.jobs ? ['--jobs'] : [])], {
    cwd: root,
    env: { ...process.env, LOG_LEVEL: 'silent', FLOCSTREAM_DEMO: '0', ...env, FLOCSTREAM_DATA_DIR: dataDir },
    stdio: ['ignore', 'pipe', 'inherit'],
  });
  const url = await new Promise<string>((resolve, reject) => {
    let out = '';
    child.stdout!.on('data', (d: Buffer) => {
      out += d.toString();
      const m = /listening (\S+)/.exec(out);
      if (m) resolve(m[1]!);
    });
    child.once('exit', (code) => reject(new Error(`an API process exited with ${code} before listening`)));
  });
  return { child, url, dataDir };
}

/** SIGTERM, wait for the exit, remove its data folder. */
export async function stopApiProcess(p: ApiProcess | undefined): Promise<void> {
  if (!p) return;
  if (p.child.exitCode === null && p.child.signalCode === null) {
    const exited = new Promise((r) => p.child.once('exit', r));
    p.child.kill('SIGTERM');
    await exited;
  }
  fs.rmSync(p.dataDir, { recursive: true, force: true });
}
