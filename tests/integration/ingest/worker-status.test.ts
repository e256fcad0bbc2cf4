import os from 'node:os';
import mqtt, { type MqttClient } from 'mqtt';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { IngestService, type IngestServiceEvents } from '../../../ingest/ingest-service.ts';
import { INGEST_CHANNEL, parseIngestEvent, type IngestEvent } from '../../../shared/contracts/ingest-events.ts';
import { discoveryOut, ingestStatusOut } from '../../../shared/contracts/wiring.ts';
import { createTestApp, type TestApp } from '../../helpers/app.ts';
import { freePort, ingestConfig, silentLog, startTestBroker, tempDir, waitFor, type TestBroker } from './helpers.ts';

type Agent = Awaited<ReturnType<TestApp['agent']>>;

/** Resolves with the first `event` of `svc` that satisfies `ok`, or fails after `timeoutMs`. */
function nextEvent<K extends keyof IngestServiceEvents>(svc: IngestService, event: K, ok: (...a: IngestServiceEvents[K]) => boolean, timeoutMs = 10_000): Promise<IngestServiceEvents[K][0]> {
  return new Promise((resolve, reject) => {
    const t = setTimeout(() => {
      svc.events.off(event, on as never);
      reject(new Error(`no ${event} event within ${timeoutMs} ms`));
    }, timeoutMs);
    const on = (...a: IngestServiceEvents[K]) => {
      if (!ok(...a)) return;
      clearTimeout(t);
      svc.events.off(event, on as never);
      resolve(a[0]);
    };
    svc.events.on(event, on as never);
  });
}

/**
 * Ingest and the API share only PostgreSQL: the real ingest service (in-process, its own data
 * folder) writes its heartbeat row and the MQTT topics it sees, the API (its own data folder)
 * answers from the rows, and a wiring change made through the API reaches ingest by NOTIFY.
 */
describe('ingest ↔ API through PostgreSQL', () => {
  let h: TestApp;
  let analyst: Agent;
  let integ: Agent;
  let broker: TestBroker;
  let svc: IngestService;
  let pub: MqttClient;
  let listen: pg.Client;
  const announced: IngestEvent[] = [];
  let plant: number;
  let sourceId: number;

  beforeAll(async () => {
    h = await createTestApp();
    analyst = await h.agent('analyst');
    integ = await h.agent('integrator');
    broker = await startTestBroker(await freePort());
    plant = (await h.ctx.db.pool.query(`INSERT INTO plants (code, name) VALUES ('kb', 'Kestrel Bend') RETURNING id`)).rows[0].id;
    const src = await integ.post(`/api/v1/plants/${plant}/sources`).send({ name: 'broker', kind: 'mqtt', url: broker.url, options: { protocolVersion: 4, topics: ['kb/#'] } });
    expect(src.status).toBe(201);
    sourceId = src.body.id;
    expect((await integ.post(`/api/v1/plants/${plant}/tags`).send({ name: 'AB1 MLSS', sourceId, address: 'kb/ab1/mlss', unit: 'g/L' })).status).toBe(201);
    listen = new pg.Client({ connectionString: h.t.url });
    await listen.connect();
    listen.on('notification', (n) => {
      const e = parseIngestEvent(n.payload);
      if (e) announced.push(e);
    });
    await listen.query(`LISTEN ${INGEST_CHANNEL}`);
    // The fallback re-read is an hour away: only a NOTIFY can make ingest see a change here.
    svc = await IngestService.start(ingestConfig(h.t.url, tempDir('ingest-host'), { reloadMs: 3_600_000, statusMs: 250 }), silentLog);
    await waitFor('ingest connected', async () => svc.status().sources[0]?.state, (s) => s === 'connected');
    pub = await mqtt.connectAsync(broker.url, { clientId: 'it-worker-status-pub', protocolVersion: 4 });
  });

  afterAll(async () => {
    await pub?.endAsync().catch(() => {});
    await svc?.stop();
    await listen?.end();
    await broker?.close();
    await h?.close();
  });

  it('the API reports the worker from its heartbeat row: host, pid, sources, and announces its start', async () => {
    await nextEvent(svc, 'heartbeat', (b) => b.error === null && svc.status().sources[0]?.state === 'connected');
    const r = await analyst.get('/api/v1/ingest/status');
    expect(r.status).toBe(200);
    const st = ingestStatusOut.parse(r.body);
    expect(st).toMatchObject({ running: true, pid: process.pid, loadError: null });
    expect(st.reason).toBeUndefined();
    expect(st.workers).toHaveLength(1);
    expect(st.workers[0]).toMatchObject({ id: svc.registry.id, host: os.hostname(), pid: process.pid, running: true, stoppedAt: null, heartbeat_ms: 250, sourceIds: [sourceId] });
    // Running means a heartbeat younger than three periods (0.75 s here).
    expect(st.workers[0]!.heartbeatAge_s).toBeLessThan(0.75);
    expect(st.sources).toEqual([expect.objectContaining({ sourceId, kind: 'mqtt', state: 'connected', tags: 1 })]);
    expect(announced).toContainEqual({ event: 'worker', workerId: svc.registry.id, host: os.hostname(), state: 'started' });
  });

  it('topics ingest sees are listed by the API from mqtt_discovery, counts exact, unmapped ones included', async () => {
    for (let i = 0; i < 3; i++) await pub.publishAsync('kb/ab1/mlss', JSON.stringify({ v: 3.1 + i }), { qos: 1 });
    for (let i = 0; i < 2; i++) await pub.publishAsync('kb/ab2/unknown', '7.5', { qos: 1 });
    const got = await waitFor(
      'both topics with all their messages',
      async () => discoveryOut.parse((await integ.get(`/api/v1/sources/${sourceId}/discovery`)).body),
      (d) => d.topics.length === 2 && d.topics.reduce((a, t) => a + t.count, 0) === 5,
      10_000,
    );
    const tagId = (await h.ctx.db.pool.query(`SELECT id FROM tags WHERE address = 'kb/ab1/mlss'`)).rows[0].id;
    expect(got.topics).toEqual([
      expect.objectContaining({ topic: 'kb/ab1/mlss', count: 3, lastPayload: '{"v":5.1}', tagId }),
      expect.objectContaining({ topic: 'kb/ab2/unknown', count: 2, lastPayload: '7.5', tagId: null }),
    ]);
    expect(got.asOf).not.toBeNull();
    expect(announced.filter((e) => e.event === 'discovery' && e.sourceId === sourceId).reduce((a, e) => a + (e.event === 'discovery' ? e.newTopics : 0), 0)).toBe(2);
  });

  it('a tag added through the API reaches ingest by NOTIFY (the fallback poll is an hour away)', async () => {
    const reloaded = nextEvent(svc, 'reloaded', (e) => e.reason === 'notify' && e.tags === 2);
    const made = await integ.post(`/api/v1/plants/${plant}/tags`).send({ name: 'AB2 MLSS', sourceId, address: 'kb/ab2/unknown', unit: 'g/L' });
    expect(made.status).toBe(201);
    expect(await reloaded).toEqual({ reason: 'notify', sources: 1, tags: 2, error: null });
    expect(svc.status().sources[0]!.tags).toBe(2);
    expect(announced).toContainEqual({ event: 'wiring', table: 'tags' });
  });

  it('a clean stop marks the row: running false with the reason, the last figures kept', async () => {
    await svc.stop();
    const st = ingestStatusOut.parse((await analyst.get('/api/v1/ingest/status')).body);
    expect(st).toMatchObject({ running: false, pid: process.pid });
    expect(st.reason).toMatch(/^ingest stopped at \d{4}-/);
    expect(st.workers[0]).toMatchObject({ id: svc.registry.id, running: false });
    expect(st.workers[0]!.stoppedAt).not.toBeNull();
    expect(st.sources[0]).toMatchObject({ sourceId, state: 'disconnected' });
    await waitFor('stop announced', async () => announced.some((e) => e.event === 'worker' && e.state === 'stopped'), (x) => x, 5_000);
  });
});
