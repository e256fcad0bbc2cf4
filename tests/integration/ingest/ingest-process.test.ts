import { spawn } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ingestStatusOut } from '../../../shared/contracts/wiring.ts';
import { createTestApp, type TestApp } from '../../helpers/app.ts';
import { freePort, startTestBroker, tempDir, waitFor, type TestBroker } from './helpers.ts';

const ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');

/**
 * The ingest process as `npm start` runs it, given only DATABASE_URL (and a data folder of its
 * own, as on another host): the API, with a different data folder, reports it from its
 * heartbeat row; its info lines go to its own log file, its terminal output stays quiet.
 */
describe('ingest process ↔ API', () => {
  let h: TestApp;
  let broker: TestBroker;
  const dataDir = tempDir('ingest-proc');
  let out = '';
  let child: ReturnType<typeof spawn>;

  beforeAll(async () => {
    h = await createTestApp();
    broker = await startTestBroker(await freePort());
    const plant = (await h.ctx.db.pool.query(`INSERT INTO plants (code, name) VALUES ('kb', 'Kestrel Bend') RETURNING id`)).rows[0].id;
    await h.ctx.db.pool.query(`INSERT INTO sources (plant_id, name, kind, url, options) VALUES ($1, 'broker', 'mqtt', $2, '{"protocolVersion":4}')`, [plant, broker.url]);
    child = spawn(process.execPath, ['--import', 'tsx', 'ingest/main.ts'], {
      cwd: ROOT,
      env: { PATH: process.env.PATH ?? '', DATABASE_URL: h.t.url, FLOCSTREAM_DATA_DIR: dataDir, LOG_LEVEL: 'info', INGEST_STATUS_MS: '300', INGEST_MQTT_CLIENT_ID: 'it-proc' },
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    child.stdout!.on('data', (b: Buffer) => (out += b.toString()));
    child.stderr!.on('data', (b: Buffer) => (out += b.toString()));
  });

  afterAll(async () => {
    if (child && child.exitCode === null) {
      child.kill('SIGTERM');
      await new Promise((r) => child.once('exit', r));
    }
    await broker?.close();
    await h?.close();
  });

  it('is reported running from its heartbeat row, then stopped after SIGTERM; its info log is in <dataDir>/logs/ingest.log', async () => {
    const analyst = await h.agent('analyst');
    const st = await waitFor(
      'ingest connected, as the API sees it',
      async () => ingestStatusOut.parse((await analyst.get('/api/v1/ingest/status')).body),
      (s) => s.running && s.sources[0]?.state === 'connected',
      30_000,
    );
    expect(st.pid).toBe(child.pid);
    expect(st.workers).toEqual([expect.objectContaining({ pid: child.pid, running: true, heartbeat_ms: 300 })]);

    child.kill('SIGTERM');
    const code = await new Promise((r) => child.once('exit', r));
    expect(code).toBe(0);
    const after = ingestStatusOut.parse((await analyst.get('/api/v1/ingest/status')).body);
    expect(after).toMatchObject({ running: false, pid: child.pid });
    expect(after.reason).toMatch(/^ingest stopped at/);

    const lines = fs
      .readFileSync(path.join(dataDir, 'logs', 'ingest.log'), 'utf8')
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l) as { level: number; msg: string });
    expect(lines.map((l) => l.msg)).toEqual(expect.arrayContaining(['ingest running', 'source started', 'mqtt connected', 'stopping: final flush']));
    // pino levels: 30 info, 40 warn. Info lines stay in the file; the terminal gets none of them.
    expect(out).not.toMatch(/"level":30/);
  });
});
