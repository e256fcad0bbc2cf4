import mqtt, { type MqttClient } from 'mqtt';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { IngestService } from '../../../ingest/ingest-service.ts';
import type { IndexedMemoryPersistence } from '../../../server/broker/indexed-persistence.ts';
import { createTestDatabase, type TestDatabase } from '../../helpers/db.ts';
import { drained, freePort, ingestConfig, scalar, seedWiring, silentLog, startTestBroker, tempDir, waitFor, type TestBroker } from './helpers.ts';

const TAGS = 20;

async function publisher(url: string, clientId: string): Promise<MqttClient> {
  // Clean Session 0 and a fixed id: unacknowledged QoS 1 publishes are resent after a reconnect.
  return mqtt.connectAsync(url, { clientId, clean: false, protocolVersion: 4, reconnectPeriod: 200 });
}

/** Publishes `n` single-value messages, QoS 1, one unique timestamp per message; `onProgress` after each window. */
async function publishSeries(c: MqttClient, n: number, t0: number, onProgress?: (sent: number) => Promise<void> | void): Promise<void> {
  const window = 500;
  for (let i = 0; i < n; i += window) {
    const ps: Promise<unknown>[] = [];
    for (let k = i; k < Math.min(n, i + window); k++) {
      const tag = k % TAGS;
      const ts = new Date(t0 + Math.floor(k / TAGS) * 10).toISOString();
      ps.push(c.publishAsync(`t/tag${tag}`, JSON.stringify({ v: k, ts }), { qos: 1 }));
    }
    await Promise.all(ps);
    await onProgress?.(Math.min(n, i + window));
  }
}

describe('MQTT → PostgreSQL', () => {
  let t: TestDatabase;
  let pool: pg.Pool;
  let broker: TestBroker;
  let svc: IngestService;
  let pub: MqttClient;
  let tagIds: number[];
  const dataDir = tempDir('mqtt-it');
  /** Ingest's MQTT client identifier at the broker (prefix and source id). */
  const ingestClientId = () => 'it-ingest-' + (svc.status().sources[0]?.sourceId ?? 0);

  beforeAll(async () => {
    t = await createTestDatabase();
    pool = new pg.Pool({ connectionString: t.url, max: 3 });
    broker = await startTestBroker(await freePort());
    const seeded = await seedWiring(t.url, {
      kind: 'mqtt',
      sourceUrl: broker.url,
      options: { topics: ['t/#', 'p/#', 'junk/#', 'bad/#'] },
      addresses: [...Array.from({ length: TAGS }, (_, i) => `t/tag${i}`), 'p/+/flow', 'bad/value'],
    });
    tagIds = seeded.tagIds;
    svc = await IngestService.start(ingestConfig(t.url, dataDir, { maxBacklog: 1_000 }), silentLog);
    await waitFor('ingest connected', async () => svc.status().sources[0]?.state, (s) => s === 'connected');
    pub = await publisher(broker.url, 'it-publisher');
  });

  afterAll(async () => {
    await pub?.endAsync().catch(() => {});
    await svc?.stop();
    await broker?.close();
    await pool?.end();
    await t?.drop();
  });

  it('stores exactly N rows for N published messages, with rollups and tag_latest consistent', async () => {
    const N = 20_000;
    const t0 = Date.UTC(2026, 0, 10, 0, 0, 0);
    await publishSeries(pub, N, t0);
    const ids = tagIds.slice(0, TAGS);
    const q = `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`;
    const range = [ids, new Date(t0), new Date(t0 + 86_400_000)];
    await waitFor('N rows', () => scalar(pool, q, range), (n) => n >= N);
    await drained(broker, ingestClientId(), svc);
    expect(await scalar(pool, q, range)).toBe(N);
    // Rollups count each inserted sample once.
    expect(await scalar(pool, `SELECT sum(count) FROM rollup_1m WHERE tag_id = ANY($1) AND bucket >= $2 AND bucket < $3`, range)).toBe(N);
    expect(await scalar(pool, `SELECT sum(count) FROM rollup_1h WHERE tag_id = ANY($1) AND bucket >= $2 AND bucket < $3`, range)).toBe(N);
    // Value k was published at tag k % TAGS; the sum over all is 0 + … + N−1.
    expect(await scalar(pool, `SELECT sum(sum) FROM rollup_1m WHERE tag_id = ANY($1) AND bucket >= $2 AND bucket < $3`, range)).toBe((N * (N - 1)) / 2);
    const latest = await pool.query(`SELECT tag_id, value FROM tag_latest WHERE tag_id = ANY($1) ORDER BY tag_id`, [ids]);
    expect(latest.rows).toHaveLength(TAGS);
    expect(latest.rows[0].value).toBe(N - TAGS);
    // Timestamps keep their milliseconds through the rollup and latest-value upserts (sent as
    // epoch milliseconds, turned into timestamptz by to_timestamp in SQL).
    expect(await scalar(pool, `SELECT count(*) FROM tag_latest l WHERE l.tag_id = ANY($1) AND l.ts IS DISTINCT FROM (SELECT max(ts) FROM samples s WHERE s.tag_id = l.tag_id AND s.ts >= $2 AND s.ts < $3)`, range)).toBe(0);
    expect(
      await scalar(pool, `SELECT count(*) FROM rollup_1m r WHERE r.tag_id = ANY($1) AND r.bucket >= $2 AND r.bucket < $3 AND r.last_ts IS DISTINCT FROM (SELECT max(ts) FROM samples s WHERE s.tag_id = r.tag_id AND s.ts >= r.bucket AND s.ts < r.bucket + interval '1 minute')`, range),
    ).toBe(0);
    // Rows went into their day partition, not the default one.
    const parts = await pool.query(`SELECT DISTINCT tableoid::regclass::text p FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range);
    expect(parts.rows.map((r) => r.p)).toEqual(['samples_20260110']);
  });

  it('holds the PUBACK until the row is committed', async () => {
    const ingestId = 'it-ingest-' + (svc.status().sources[0]?.sourceId ?? 0);
    const acks: number[] = [];
    const onAck = (packet: { messageId?: number } | undefined, client: { id: string } | undefined) => {
      if (client?.id === ingestId && packet) acks.push(Date.now());
    };
    broker.broker.on('ack', onAck);
    const locker = await pool.connect();
    try {
      await locker.query('BEGIN');
      await locker.query('LOCK TABLE samples IN ACCESS EXCLUSIVE MODE');
      const ts = new Date(Date.UTC(2026, 0, 11)).toISOString();
      await pub.publishAsync('t/tag0', JSON.stringify({ v: 42, ts }), { qos: 1 });
      // The writer's COPY waits on the lock: the row cannot be committed, so no PUBACK may have left.
      await waitFor(
        'writer waiting on the samples lock',
        async () => scalar(pool, `SELECT count(*) FROM pg_locks WHERE NOT granted`, []),
        (n) => Number(n) >= 1,
        10_000,
      );
      expect(svc.status().sources[0]?.unacknowledged).toBeGreaterThanOrEqual(1);
      expect(acks).toHaveLength(0);
      await locker.query('COMMIT');
      await waitFor('PUBACK after commit', async () => acks.length, (n) => n === 1, 10_000);
      expect(await scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1 AND ts = $2`, [tagIds[0], ts])).toBe(1);
    } finally {
      await locker.query('ROLLBACK').catch(() => {});
      locker.release();
      broker.broker.removeListener('ack', onAck);
    }
  });

  it('stops reading from the broker while the backlog is at its high-water mark, and loses nothing', async () => {
    // With the samples table locked nothing commits; after 1 000 samples (maxBacklog) ingest must
    // stop taking messages — the rest wait in the broker — and take them once the lock is gone.
    const N = 3_000;
    const t0 = Date.UTC(2026, 0, 12);
    const ids = tagIds.slice(0, TAGS);
    const range = [ids, new Date(t0), new Date(t0 + 86_400_000)];
    const q = `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`;
    const pressureBefore = svc.status().writer.pressureEvents;
    const received = () => svc.status().sources[0]!.messages;
    const receivedBefore = received();
    const locker = await pool.connect();
    try {
      await locker.query('BEGIN');
      await locker.query('LOCK TABLE samples IN ACCESS EXCLUSIVE MODE');
      await publishSeries(pub, N, t0);
      await waitFor('pressure', async () => svc.status().writer.pressureEvents, (n) => n > pressureBefore, 10_000);
      // Intake paused: the session stops reading its socket and hands over nothing more it
      // had already parsed (ingest/mqtt/mqtt-session.ts) until the backlog falls.
      await waitFor('intake paused', async () => svc.status().sources[0]!.details.paused, (p) => p === true, 10_000);
      // at most the high-water mark plus the message being handled when it was reached
      const held = received() - receivedBefore;
      expect(held).toBeGreaterThanOrEqual(1_000);
      expect(held).toBeLessThanOrEqual(1_001);
      expect(svc.status().writer.backlog).toBeLessThanOrEqual(1_001);
      await locker.query('COMMIT');
    } finally {
      await locker.query('ROLLBACK').catch(() => {});
      locker.release();
    }
    await waitFor('N rows after the pause', () => scalar(pool, q, range), (n) => n >= N, 20_000);
    await drained(broker, ingestClientId(), svc);
    expect(await scalar(pool, q, range)).toBe(N);
    expect(received() - receivedBefore).toBe(N);
  });

  it('does not store a dead letter twice when the connection drops between commit and PUBACK', async () => {
    // MQTT 3.1.1 §4.4: unacknowledged QoS 1 messages are sent again after a reconnect. Hold the
    // commit with a table lock, drop the ingest connection, then let the commit through: the rows
    // are stored, the PUBACKs cannot be sent, the broker redelivers, and nothing is written twice.
    const ingestId = 'it-ingest-' + (svc.status().sources[0]?.sourceId ?? 0);
    const before = await scalar(pool, `SELECT count(*) FROM dead_letters WHERE address = 'bad/value'`);
    const N = 50;
    const locker = await pool.connect();
    try {
      await locker.query('BEGIN');
      await locker.query('LOCK TABLE dead_letters IN ACCESS EXCLUSIVE MODE');
      for (let i = 0; i < N; i++) await pub.publishAsync('bad/value', `{"v": "not a number ${i}"}`, { qos: 1 });
      await waitFor('ingest holding the messages', async () => svc.status().sources[0]!.unacknowledged, (n) => n >= N, 10_000);
      // The writer's insert waits on the lock, so its commit is what the dropped connection misses.
      await waitFor('writer waiting on the dead_letters lock', () => scalar(pool, `SELECT count(*) FROM pg_locks WHERE NOT granted`), (n) => n >= 1, 10_000);
      const client = (broker.broker as unknown as { clients: Record<string, { close(): void }> }).clients[ingestId];
      expect(client).toBeDefined();
      client!.close();
      await waitFor('ingest saw the connection drop', async () => svc.status().sources[0]?.state, (st) => st !== 'connected', 10_000);
      await locker.query('COMMIT');
    } finally {
      await locker.query('ROLLBACK').catch(() => {});
      locker.release();
    }
    await waitFor('ingest reconnected', async () => svc.status().sources[0]?.state, (st) => st === 'connected', 15_000);
    await waitFor('N dead letters', () => scalar(pool, `SELECT count(*) FROM dead_letters WHERE address = 'bad/value'`), (n) => n >= before + N, 15_000);
    // Give the redelivery time to arrive and be recognised.
    await waitFor('redeliveries recognised', async () => Number(svc.status().sources[0]!.details.redelivered ?? 0), (n) => n > 0, 15_000);
    await drained(broker, ingestId, svc);
    expect(await scalar(pool, `SELECT count(*) FROM dead_letters WHERE address = 'bad/value'`)).toBe(before + N);
  });

  it('acknowledges each message exactly once, stored or not (MQTT 3.1.1 §4.3.2)', async () => {
    // A second PUBACK for an identifier could acknowledge the broker's next message under the
    // reused identifier before ingest stored it. aedes emits 'ack' for every PUBACK it receives,
    // with the queued packet it cleared, or without one when nothing was waiting for that PUBACK.
    const ingestId = 'it-ingest-' + (svc.status().sources[0]?.sourceId ?? 0);
    const acks = { cleared: 0, stray: 0 };
    const onAck = (packet: unknown, client: { id?: string } | null) => {
      if (client?.id !== ingestId) return;
      if (packet) acks.cleared++;
      else acks.stray++;
    };
    broker.broker.on('ack', onAck);
    try {
      const t0 = Date.UTC(2026, 0, 14);
      const ps: Promise<unknown>[] = [];
      for (let i = 0; i < 300; i++) {
        ps.push(pub.publishAsync(`junk/once/${i}`, '{"v": 1}', { qos: 1 })); // unmapped: acknowledged at once
        ps.push(pub.publishAsync(`t/tag${i % TAGS}`, JSON.stringify({ v: i, ts: new Date(t0 + i * 1000).toISOString() }), { qos: 1 })); // stored, then acknowledged
      }
      await Promise.all(ps);
      await waitFor('600 PUBACKs from ingest', async () => acks.cleared + acks.stray, (n) => n >= 600, 15_000);
      await drained(broker, ingestId, svc);
      expect(acks).toEqual({ cleared: 600, stray: 0 });
    } finally {
      broker.broker.off('ack', onAck);
    }
  });

  it('still stores exactly N when the broker restarts mid-stream', async () => {
    const N = 20_000;
    const t0 = Date.UTC(2026, 0, 12, 0, 0, 0);
    const sentBefore = svc.status().sources[0]!.messages;
    let restarted = false;
    await publishSeries(pub, N, t0, async (sent) => {
      if (!restarted && sent >= 6_000) {
        restarted = true;
        // Restart once the broker has handed every acknowledged publish to ingest. aedes keeps
        // messages between its publisher PUBACK and the subscriber write in its in-memory
        // emitter (not in the persistence), so restarting inside that window loses them at the
        // broker — observed as exactly 100 (mqemitter's default concurrency) missing rows.
        // Ingest still holds PUBACKs of its unflushed batch here, so the broker redelivers those.
        await waitFor('broker drained to ingest', async () => svc.status().sources[0]!.messages, (m) => m >= sentBefore + sent, 10_000);
        await broker.restart(() => svc.status().sources[0]?.state !== 'connected');
      }
    });
    expect(restarted).toBe(true);
    const ids = tagIds.slice(0, TAGS);
    const q = `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`;
    const range = [ids, new Date(t0), new Date(t0 + 86_400_000)];
    await waitFor('N rows after broker restart', () => scalar(pool, q, range), (n) => n >= N, 20_000).catch(async (e) => {
      const r = await pool.query(`SELECT k FROM generate_series(0, $1 - 1) k WHERE NOT EXISTS (SELECT 1 FROM samples WHERE tag_id = ANY($2) AND ts >= $3 AND ts < $4 AND value = k)`, [N, ids, range[1], range[2]]);
      console.log('MISSING', r.rows.length, r.rows.slice(0, 5), r.rows.slice(-5));
      throw e;
    });
    await drained(broker, ingestClientId(), svc);
    expect(await scalar(pool, q, range)).toBe(N);
    expect(await scalar(pool, `SELECT sum(count) FROM rollup_1m WHERE tag_id = ANY($1) AND bucket >= $2 AND bucket < $3`, range)).toBe(N);
    expect(svc.status().sources[0]?.reconnects).toBeGreaterThanOrEqual(1);
    // The restarted broker kept its store (as a durable broker would) with the packet identifiers
    // of messages queued before the restart, and hands out new identifiers from a random start:
    // aedes can then have two messages in flight under one identifier (MQTT 3.1.1 §2.3.1 wants
    // them unique), clears the wrong one of its queue, fails a later update of it ("no such
    // packet") and drops the connection — redeliveries, until the queue has drained. Let it
    // drain here so the next test does not start inside that.
    const ingestId = 'it-ingest-' + (svc.status().sources[0]?.sourceId ?? 0);
    const store = (broker.broker as unknown as { persistence: IndexedMemoryPersistence }).persistence;
    await waitFor('broker queue for ingest drained', async () => store.outgoingCount(ingestId), (n) => n === 0, 20_000);
    await waitFor('ingest connected', async () => svc.status().sources[0]?.state, (st) => st === 'connected', 15_000);
  });

  it('accounts for 10 000 malformed payloads in dead_letters or as unmapped, and keeps good data flowing', async () => {
    const before = svc.status().sources[0]!;
    const dlBefore = await scalar(pool, `SELECT count(*) FROM dead_letters`);
    const big = 'x'.repeat(1024 * 1024);
    const bad: [string, string][] = [];
    let unknown = 0;
    for (let i = 0; i < 10_000; i++) {
      switch (i % 10) {
        case 0: bad.push(['bad/value', '{"v": 1.5, "ts": ']); break; // broken JSON
        case 1: bad.push(['bad/value', '{"v": "1.5"}']); break; // wrong type
        case 2: bad.push(['bad/value', 'NaN']); break;
        case 3: bad.push(['bad/value', 'Infinity']); break;
        case 4: bad.push(['bad/value', '{"v": 1e999}']); break; // JSON overflows to Infinity
        case 5: bad.push(['bad/value', i % 1000 === 5 ? `{"v": "${big}"}` : '{"v": null}']); break; // 1 MB string / null without bad quality
        case 6: bad.push(['bad/value', '{"v": 2, "ts": "yesterday"}']); break;
        case 7: bad.push(['bad/value', '{"samples": []}']); break; // empty batch
        case 8: bad.push([`junk/${i}`, '{"not": "ours"}']); unknown++; break; // unknown topic
        case 9: bad.push(['bad/value', '\u0000\u0001garbage']); break;
      }
    }
    const deadExpected = bad.length - unknown;
    // One dead letter per distinct bad message (topic and payload; its reason follows from them),
    // seen as often as it was published: 10 of them (cases 0–7 and 9, case 5 twice).
    const distinctBad = new Set(bad.filter(([topic]) => !topic.startsWith('junk/')).map(([topic, p]) => `${topic}\u0000${p}`)).size;
    expect(distinctBad).toBe(10);
    const seen = () => scalar(pool, `SELECT coalesce(sum(times_seen), 0) FROM dead_letters`);
    const seenBefore = await seen();
    const t0 = Date.UTC(2026, 0, 13);
    const good = 2_000;
    let g = 0;
    for (let i = 0; i < bad.length; i += 250) {
      const ps = bad.slice(i, i + 250).map(([topic, p]) => pub.publishAsync(topic, p, { qos: 1 }));
      for (let k = 0; k < 50 && g < good; k++, g++) {
        ps.push(pub.publishAsync(`t/tag${g % TAGS}`, JSON.stringify({ v: g, ts: new Date(t0 + Math.floor(g / TAGS) * 1000).toISOString() }), { qos: 1 }));
      }
      await Promise.all(ps);
    }
    expect(g).toBe(good);
    await waitFor('dead letters', seen, (n) => n >= seenBefore + deadExpected, 30_000);
    const range = [tagIds.slice(0, TAGS), new Date(t0), new Date(t0 + 86_400_000)];
    await waitFor('good rows', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range), (n) => n >= good);
    await drained(broker, ingestClientId(), svc, 30_000);
    expect(await seen()).toBe(seenBefore + deadExpected);
    expect(await scalar(pool, `SELECT count(*) FROM dead_letters`)).toBe(dlBefore + distinctBad);
    expect(await scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range)).toBe(good);
    const after = svc.status().sources[0]!;
    expect(after.unmapped - before.unmapped).toBe(unknown);
    // Alive: connected (again) and still storing good data after the flood.
    await waitFor('connected after the flood', async () => svc.status().sources[0]?.state, (st) => st === 'connected', 15_000);
    const probeTs = new Date(t0 + 3_600_000).toISOString();
    await pub.publishAsync('t/tag1', JSON.stringify({ v: 1, ts: probeTs }), { qos: 1 });
    await waitFor('probe stored', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1 AND ts = $2`, [tagIds[1], probeTs]), (n) => n === 1, 15_000);
    // Large payloads are truncated but keep their size.
    const large = await pool.query(`SELECT length(payload) len, payload_bytes FROM dead_letters WHERE payload_bytes > 1000000 LIMIT 1`);
    expect(large.rows[0].len).toBeLessThanOrEqual(4096);
    expect(large.rows[0].payload_bytes).toBeGreaterThan(1024 * 1024);
    const reasons = await pool.query(`SELECT DISTINCT split_part(reason, ':', 1) r FROM dead_letters`);
    expect(reasons.rows.map((r) => r.r).sort()).toEqual(['invalid JSON', 'invalid batch', 'invalid value', 'not JSON and not a plain number'].sort());
    // Unknown topics are listed for the wiring view, not dead-lettered.
    const junk = await scalar(pool, `SELECT count(*) FROM dead_letters WHERE address LIKE 'junk/%'`);
    expect(junk).toBe(0);
  });

  it('maps pattern topics and batches, and applies scaling', async () => {
    const t0 = Date.UTC(2026, 0, 14);
    const samples = Array.from({ length: 300 }, (_, i) => ({ topic: `p/ab${i % 3}/flow`, v: i, ts: new Date(t0 + i * 1000).toISOString() }));
    samples.push({ topic: 'nobody/maps/this', v: 1, ts: new Date(t0).toISOString() });
    await pub.publishAsync('p/batch', JSON.stringify({ samples }), { qos: 1 });
    const patternTag = tagIds[TAGS]!;
    await waitFor('batched rows', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1 AND ts >= $2`, [patternTag, new Date(t0)]), (n) => n === 300);
  });
});
