import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { portInUse } from '../../server/db/local-postgres.ts';
import { launcherEnv, pgRunning, processesMatching, root, runLauncher } from '../helpers/launcher.ts';

/**
 * `npm run dev` as a person runs it: PostgreSQL, broker, simulator and ingest as under npm start,
 * the API under tsx watch, Vite serving src/ with /api proxied. Ctrl-C must leave nothing behind.
 */
const dataDir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-dev-'));
const base = 20000 + Math.floor(Math.random() * 20000);
const vitePort = base + 4;
const env = launcherEnv(dataDir, base);

describe('npm run dev and Ctrl-C', () => {
  afterAll(() => fs.rmSync(dataDir, { recursive: true, force: true }));

  it('serves the monitor through Vite with /api proxied, reloads the API on a change, and stops everything', async () => {
    const dev = await runLauncher(['run', 'dev', '--', '--vite-port', String(vitePort)], env, 120_000);
    expect(dev.text()).toContain(`monitor (Vite, hot reload) at http://127.0.0.1:${vitePort}/`);
    expect(dev.text()).toContain(`/api proxied to the API at http://127.0.0.1:${base}`);

    // The page comes from Vite's dev server (its HMR client is injected), not from dist/.
    const page = await fetch(`http://127.0.0.1:${vitePort}/`).then((r) => r.text());
    expect(page).toContain('/@vite/client');
    expect(page).toContain('/src/main.tsx');
    expect((await fetch(`http://127.0.0.1:${vitePort}/@vite/client`)).status).toBe(200);
    const health = await fetch(`http://127.0.0.1:${vitePort}/api/health`).then((r) => r.json());
    expect(health.database.ok).toBe(true);
    expect(pgRunning(dataDir)).toBe(true);

    // Saving a file the API imports restarts it (tsx watch) on the same database; the content is unchanged.
    const entry = path.join(root, 'scripts/api.ts');
    fs.writeFileSync(entry, fs.readFileSync(entry));
    await dev.waitForOutput(/Restarting\.\.\.[\s\S]*API listening at/, 60_000);
    expect((await fetch(`http://127.0.0.1:${vitePort}/api/health`).then((r) => r.json())).database.ok).toBe(true);

    expect(await dev.stop()).toContain('stopped; PostgreSQL is down');
    expect(pgRunning(dataDir)).toBe(false);
    for (const p of [base, base + 1, base + 2, base + 3, vitePort]) expect(await portInUse(p), `port ${p}`).toBe(false);
    expect(processesMatching([dataDir, `mqtt://127.0.0.1:${base + 2}`, `--opcua-port ${base + 3}`])).toEqual([]);
  }, 240_000);
});
