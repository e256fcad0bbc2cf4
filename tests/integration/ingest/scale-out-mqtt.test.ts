import { spawn } from 'node:child_process';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ingestStatusOut, type IngestStatusOut } from '../../../shared/contracts/wiring.ts';
import { createTestApp, type TestApp } from '../../helpers/app.ts';
import { spawnIngestWorker, type IngestWorkerProcess } from '../../helpers/ingest-worker.ts';
import { startMosquitto, type Mosquitto } from '../../helpers/mosquitto.ts';
import { scalar, tempDir, waitFor } from './helpers.ts';

const ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');
const N = 200_000;
const TAGS = 1_000;
/** The default heartbeat: a lease then lasts 6 s, which a busy 2-core machine's event loop delays never reach. */
const STATUS_MS = 2_000;

/**
 * Two ingest worker processes on one MQTT 5 broker (Debian's mosquitto, started here with a
 * configuration file this test writes), sharing the source as one shared subscription
 * (`$share/flocstream/b/#`, MQTT 5.0 §4.8.2). A publisher process sends 200 000 QoS 1 samples on
 * 1000 topics (tests/bench/mqtt-load.ts: sample k on b/tag<k mod 1000>, value k, so the stored
 * values sum to 0 + 1 + … + 199 999 = 199 999 × 200 000 / 2 = 19 999 900 000); one worker is
 * SIGKILLed once half of them are stored. mosquitto keeps the dead worker's session and goes on
 * queueing its share (and would drop it when the session expires: MQTT 5.0 §4.8.2 only says a
 * broker SHOULD pass it on), so the survivor must resume that session and take its messages.
 */
describe('ingest scale-out: MQTT 5 shared subscription over two worker processes', () => {
  let h: TestApp;
  let broker: Mosquitto;
  let sourceId: number;
  const workers: IngestWorkerProcess[] = [];
  const dir = tempDir('scale-mqtt');

  beforeAll(async () => {
    h = await createTestApp();
    broker = await startMosquitto(path.join(dir, 'broker'));
    const pool = h.ctx.db.pool;
    const plant = (await pool.query(`INSERT INTO plants (code, name) VALUES ('so', 'Scale-out plant') RETURNING id`)).rows[0].id as number;
    // protocolVersion auto: the workers find out that the broker speaks 5.0 and share the source.
    sourceId = (await pool.query(`INSERT INTO sources (plant_id, name, kind, url, options) VALUES ($1, 'mosquitto', 'mqtt', $2, '{"topics":["b/#"]}') RETURNING id`, [plant, broker.url])).rows[0].id;
    await pool.query(`INSERT INTO tags (plant_id, source_id, name, address, unit) SELECT $1, $2, 'B' || g, 'b/tag' || g, 'g/L' FROM generate_series(0, $3 - 1) g`, [plant, sourceId, TAGS]);
    for (const name of ['a', 'b']) {
      workers.push(spawnIngestWorker({ DATABASE_URL: h.t.url, FLOCSTREAM_DATA_DIR: path.join(dir, name), INGEST_STATUS_MS: String(STATUS_MS), INGEST_MQTT_CLIENT_ID: 'it-scale' }));
    }
  });

  afterAll(async () => {
    for (const w of workers) await w.stop();
    await broker?.stop();
    await h?.close();
  });

  it('stores every one of 200 000 samples exactly once when one worker is killed halfway; the status shows both workers, then one', async () => {
    const analyst = await h.agent('analyst');
    const status = async () => ingestStatusOut.parse((await analyst.get('/api/v1/ingest/status')).body);
    const [a, b] = workers as [IngestWorkerProcess, IngestWorkerProcess];
    const connected = (st: IngestStatusOut, pid: number) => st.workers.some((w) => w.pid === pid && w.running && w.sources === 1);
    await waitFor('both workers running the shared source', status, (st) => connected(st, a.pid) && connected(st, b.pid) && st.sources.filter((s) => s.state === 'connected').length === 2, 60_000, 200);
    const st0 = await status();
    for (const s of st0.sources) expect(s.details).toMatchObject({ protocolVersion: '5.0', topics: ['b/#'] });
    const leases = await h.ctx.db.pool.query<{ mqtt_client_id: string }>(`SELECT mqtt_client_id FROM source_leases WHERE source_id = $1 ORDER BY 1`, [sourceId]);
    expect(leases.rows).toHaveLength(2);
    const idB = st0.workers.find((w) => w.pid === b.pid)!.id;
    const sessionB = leases.rows.map((r) => r.mqtt_client_id).find((c) => c.endsWith(`-w${idB.slice(0, 8)}`));
    expect(sessionB).toMatch(/^it-scale-\d+-w[0-9a-f]{8}$/);

    // The publisher: its own process, every packet encoded before it starts (tests/bench/mqtt-load.ts).
    const day = Date.now() - 3_600_000;
    const pub = spawn(process.execPath, ['--import', 'tsx', 'tests/bench/mqtt-load.ts', 'publish', broker.url, 'single', String(N), '1', String(day)], { cwd: ROOT, stdio: ['ignore', 'pipe', 'inherit'] });
    let pubOut = '';
    pub.stdout!.on('data', (d: Buffer) => (pubOut += d.toString()));
    const published = new Promise<number | null>((r) => pub.once('exit', r));

    const count = () => scalar(h.ctx.db.pool, `SELECT count(*) FROM samples s JOIN tags t ON t.id = s.tag_id WHERE t.source_id = $1`, [sourceId]);
    // Both took a share before the kill (the broker alternates between the group's sessions).
    await waitFor('half of the samples stored', count, (n) => n >= N / 2, 120_000, 200);
    const share = (st: IngestStatusOut, pid: number) => st.workers.find((w) => w.pid === pid)?.messages ?? 0;
    await waitFor('both workers reporting a share', status, (st) => share(st, a.pid) > 0 && share(st, b.pid) > 0, 20_000, 200);
    await b.kill();

    // Both listed, the killed one stale once three of its heartbeats are missed; then one.
    const stale = await waitFor('the killed worker shown stale', status, (st) => st.workers.length === 2 && st.workers.some((w) => w.pid === b.pid && !w.running && w.stoppedAt === null), 30_000, 100);
    expect(stale.workers.find((w) => w.pid === a.pid)).toMatchObject({ running: true, sources: 1 });
    expect(await published).toBe(0);
    expect(JSON.parse(pubOut.trim().split('\n').pop()!)).toMatchObject({ published: N });

    await waitFor('every sample stored', count, (n) => n >= N, 150_000, 250);
    // The killed worker's session was resumed, its messages taken, and the session ended.
    await waitFor('the dead worker’s session drained and ended', async () => (await h.ctx.db.pool.query(`SELECT 1 FROM source_leases WHERE source_id = $1 AND mqtt_client_id = $2`, [sourceId, sessionB])).rowCount, (n) => n === 0, 60_000, 200);
    const one = await waitFor('only the survivor listed', status, (st) => st.workers.length === 1, 60_000, 250);
    expect(one.workers[0]).toMatchObject({ pid: a.pid, running: true, sources: 1 });
    await waitFor('nothing unacknowledged at the survivor', status, (st) => st.sources.every((s) => s.unacknowledged === 0), 30_000, 200);

    expect(await count()).toBe(N);
    const sum = await scalar(h.ctx.db.pool, `SELECT sum(s.value) FROM samples s JOIN tags t ON t.id = s.tag_id WHERE t.source_id = $1`, [sourceId]);
    expect(sum).toBe(((N - 1) * N) / 2);
    // Each topic got its 200 samples, no more, no fewer.
    const perTag = await h.ctx.db.pool.query<{ n: string }>(`SELECT count(*) AS n FROM samples s JOIN tags t ON t.id = s.tag_id WHERE t.source_id = $1 GROUP BY s.tag_id`, [sourceId]);
    expect(perTag.rows).toHaveLength(TAGS);
    expect(new Set(perTag.rows.map((r) => Number(r.n)))).toEqual(new Set([N / TAGS]));
    expect(await scalar(h.ctx.db.pool, `SELECT count(*) FROM dead_letters`)).toBe(0);
    expect(broker.log()).not.toMatch(/error/i);
  }, 240_000);
});
