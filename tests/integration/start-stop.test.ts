import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { portInUse } from '../../server/db/local-postgres.ts';
import { launcherEnv, pgRunning, processesMatching, runLauncher } from '../helpers/launcher.ts';

/**
 * `npm start`'s launcher as a person runs it: start, wait for the banner, press Ctrl-C (SIGINT
 * to the whole process group, as a terminal does), check nothing is left, start again on the
 * same data folder and find the data reused.
 */
const dataDir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-start-'));
const base = 20000 + Math.floor(Math.random() * 20000);
const env = launcherEnv(dataDir, base, { FLOCSTREAM_ADMIN_EMAIL: 'start-test@kestrel.invalid', FLOCSTREAM_ADMIN_PASSWORD: 'start-test-password' });

const leftovers = () => processesMatching([dataDir, `--opcua-port ${base + 3}`, `server/broker/main.ts 127.0.0.1 ${base + 2}`]);

describe('npm start and Ctrl-C', () => {
  afterAll(() => fs.rmSync(dataDir, { recursive: true, force: true }));

  it('starts everything, stops everything on Ctrl-C, and reuses the data on the next start', async () => {
    const first = await runLauncher(['start'], env);
    const banner = first.text();
    expect(banner).toContain(`http://127.0.0.1:${base}`);
    expect(banner).toContain('seeded the demo plant');
    // The broker runs as a process of its own (server/broker/main.ts); its port is freed on Ctrl-C below.
    expect(banner).toContain(`embedded MQTT broker listening at mqtt://127.0.0.1:${base + 2}`);
    const health = await fetch(`http://127.0.0.1:${base}/api/health`).then((r) => r.json());
    expect(health.database.ok).toBe(true);
    expect(pgRunning(dataDir)).toBe(true);
    expect(await first.stop()).toContain('stopped; PostgreSQL is down');
    expect(pgRunning(dataDir)).toBe(false);
    for (const p of [base, base + 1, base + 2, base + 3]) expect(await portInUse(p), `port ${p}`).toBe(false);
    expect(leftovers()).toEqual([]);

    const second = await runLauncher(['start'], env);
    const again = second.text();
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
    expect(pgRunning(dataDir)).toBe(false);
    expect(leftovers()).toEqual([]);
  }, 240_000);
});
