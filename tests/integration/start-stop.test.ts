import { spawn, spawnSync } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { findPgBinDir, portInUse } from '../../server/db/local-postgres.ts';

/**
 * `npm start`'s launcher as a person runs it: start, wait for the banner, press Ctrl-C (SIGINT
 * to the whole process group, as a terminal does), check nothing is left, start again on the
 * same data folder and find the data reused.
 */
const root = path.resolve(import.meta.dirname, '../..');
const dataDir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-start-'));
const base = 20000 + Math.floor(Math.random() * 20000);
const env = {
  ...process.env,
  FLOCSTREAM_DATA_DIR: dataDir,
  PORT: String(base),
  FLOCSTREAM_PG_PORT: String(base + 1),
  FLOCSTREAM_MQTT_PORT: String(base + 2),
  FLOCSTREAM_SIM_OPCUA_PORT: String(base + 3),
  FLOCSTREAM_ADMIN_EMAIL: 'start-test@kestrel.invalid',
  FLOCSTREAM_ADMIN_PASSWORD: 'start-test-password',
  DATABASE_URL: '',
};
delete (env as Record<string, string | undefined>).DATABASE_URL;

async function runUntilReady(): Promise<{ out: string[]; stop(): Promise<string> }> {
  // `npm start` itself, in its own process group like a terminal's foreground job.
  const proc = spawn('npm', ['start'], { cwd: root, env, detached: true, stdio: ['ignore', 'pipe', 'pipe'] });
  const out: string[] = [];
  // npm re-raises the SIGINT after its script ends, so the launcher's own last line is the check.
  const exited = new Promise<string>((r) => proc.once('exit', () => r(out.join(''))));
  await new Promise<void>((resolve, reject) => {
    const t = setTimeout(() => reject(new Error(`no banner in 90 s:\n${out.join('')}`)), 90_000);
    const on = (b: Buffer) => {
      out.push(b.toString());
      if (out.join('').includes('Press Ctrl-C to stop')) {
        clearTimeout(t);
        resolve();
      }
    };
    proc.stdout!.on('data', on);
    proc.stderr!.on('data', on);
    proc.once('exit', () => reject(new Error(`exited early:\n${out.join('')}`)));
  });
  return {
    out,
    async stop() {
      process.kill(-proc.pid!, 'SIGINT');
      return exited;
    },
  };
}

function pgRunning(): boolean {
  const bin = findPgBinDir()!;
  return spawnSync('runuser', ['-u', 'postgres', '--', path.join(bin, 'pg_ctl'), 'status', '-D', path.join(dataDir, 'pg')]).status === 0;
}

function leftovers(): string[] {
  const ps = spawnSync('ps', ['-eo', 'pid,args'], { encoding: 'utf8' }).stdout.split('\n');
  return ps.filter((l) => l.includes(dataDir) || l.includes(`--opcua-port ${base + 3}`) || l.includes(`server/broker/main.ts 127.0.0.1 ${base + 2}`));
}

describe('npm start and Ctrl-C', () => {
  afterAll(() => fs.rmSync(dataDir, { recursive: true, force: true }));

  it('starts everything, stops everything on Ctrl-C, and reuses the data on the next start', async () => {
    const first = await runUntilReady();
    const banner = first.out.join('');
    expect(banner).toContain(`http://127.0.0.1:${base}`);
    expect(banner).toContain('seeded the demo plant');
    // The broker runs as a process of its own (server/broker/main.ts); its port is freed on Ctrl-C below.
    expect(banner).toContain(`embedded MQTT broker listening at mqtt://127.0.0.1:${base + 2}`);
    const health = await fetch(`http://127.0.0.1:${base}/api/health`).then((r) => r.json());
    expect(health.database.ok).toBe(true);
    expect(pgRunning()).toBe(true);
    expect(await first.stop()).toContain('stopped; PostgreSQL is down');
    expect(pgRunning()).toBe(false);
    for (const p of [base, base + 1, base + 2, base + 3]) expect(await portInUse(p), `port ${p}`).toBe(false);
    expect(leftovers()).toEqual([]);

    const second = await runUntilReady();
    const again = second.out.join('');
    expect(again).toContain('found the demo plant');
    expect(again).not.toContain('creating PostgreSQL cluster');
    expect(again).not.toContain('first admin');
    const login = await fetch(`http://127.0.0.1:${base}/api/v1/auth/login`, {
      method: 'POST',
      headers: { 'Content-Type': 'application/json' },
      body: JSON.stringify({ email: 'start-test@kestrel.invalid', password: 'start-test-password' }),
    });
    expect(login.status).toBe(200);
    expect(await second.stop()).toContain('stopped; PostgreSQL is down');
    expect(pgRunning()).toBe(false);
    expect(leftovers()).toEqual([]);
  }, 240_000);
});
