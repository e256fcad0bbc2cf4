import mqtt from 'mqtt';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { IngestService } from '../../../ingest/ingest-service.ts';
import { createTestDatabase, type TestDatabase } from '../../helpers/db.ts';
import { freePort, ingestConfig, scalar, seedWiring, silentLog, startTestBroker, tempDir, waitFor, type TestBroker } from './helpers.ts';

/**
 * Two ingest workers and an MQTT source on an MQTT 3.1.1 broker (the embedded broker's code,
 * which has no shared subscriptions): one worker holds the source's lease and runs it, the other
 * stands by; when the holder stops, the other takes the lease and resumes the same persistent
 * session (the source's fixed client identifier), so what the broker queued meanwhile arrives.
 */
describe('ingest scale-out: an MQTT 3.1.1 source leased across two workers', () => {
  let t: TestDatabase;
  let pool: pg.Pool;
  let broker: TestBroker;
  let sourceId: number;
  let tagId: number;
  const svcs: IngestService[] = [];

  beforeAll(async () => {
    t = await createTestDatabase();
    pool = new pg.Pool({ connectionString: t.url, max: 2 });
    broker = await startTestBroker(await freePort());
    // protocolVersion auto: the broker refuses 5.0, so the workers lease the source.
    const seeded = await seedWiring(t.url, { kind: 'mqtt', sourceUrl: broker.url, options: { topics: ['kb/#'] }, addresses: ['kb/a'] });
    sourceId = seeded.sourceId;
    tagId = seeded.tagIds[0]!;
    for (const name of ['a', 'b']) svcs.push(await IngestService.start(ingestConfig(t.url, tempDir(`lease-${name}`), { statusMs: 300, mqttClientIdPrefix: 'it-lease' }), silentLog));
  });

  afterAll(async () => {
    for (const s of svcs) await s.stop();
    await broker?.close();
    await pool?.end();
    await t?.drop();
  });

  it('one worker runs the source, the other stands by and takes over the session when the holder stops', async () => {
    const running = () => svcs.map((s) => s.status().sources.filter((x) => x.state === 'connected').length);
    await waitFor('one worker connected', async () => running(), (r) => r[0]! + r[1]! === 1, 30_000);
    // Several heartbeats later it is still one: the stand-by's takes keep failing.
    const beats = async (n: number) => {
      const stand = svcs.find((s) => s.status().sources.length === 0)!;
      for (let i = 0; i < n; i++) await new Promise<void>((r) => stand.events.once('heartbeat', () => r()));
    };
    await beats(4);
    expect(running().sort()).toEqual([0, 1]);
    const holder = svcs.find((s) => s.status().sources.length === 1)!;
    const standby = svcs.find((s) => s !== holder)!;
    expect(holder.status().sources[0]).toMatchObject({ sourceId, details: { clientId: `it-lease-${sourceId}`, protocolVersion: '3.1.1' } });
    const lease = (await pool.query(`SELECT holder, mqtt_client_id FROM source_leases WHERE source_id = $1`, [sourceId])).rows;
    expect(lease).toEqual([{ holder: holder.registry.id, mqtt_client_id: '' }]);

    const pub = await mqtt.connectAsync(broker.url, { clientId: 'it-lease-pub', protocolVersion: 4 });
    const base = Date.UTC(2026, 5, 1);
    const send = async (from: number, n: number) => {
      for (let i = from; i < from + n; i++) await pub.publishAsync('kb/a', JSON.stringify({ v: i, ts: new Date(base + i * 1000).toISOString() }), { qos: 1 });
    };
    await send(0, 100);
    await waitFor('100 stored by the holder', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1`, [tagId]), (n) => n === 100, 15_000);

    // A clean stop releases the lease; the broker queues for the session while nobody is connected.
    await holder.stop();
    await send(100, 100);
    await waitFor('the stand-by running the source', async () => standby.status().sources[0]?.state, (s) => s === 'connected', 15_000);
    expect(standby.status().sources[0]).toMatchObject({ details: { clientId: `it-lease-${sourceId}` } });
    await send(200, 100);
    await waitFor('all 300 stored', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1`, [tagId]), (n) => n >= 300, 15_000);
    expect(await scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1`, [tagId])).toBe(300);
    // 0 + 1 + … + 299 = 299 × 300 / 2
    expect(await scalar(pool, `SELECT sum(value) FROM samples WHERE tag_id = $1`, [tagId])).toBe(44_850);
    expect((await pool.query(`SELECT holder FROM source_leases WHERE source_id = $1`, [sourceId])).rows).toEqual([{ holder: standby.registry.id }]);
    await pub.endAsync();
  });
});
