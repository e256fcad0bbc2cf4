import net from 'node:net';
import mqtt from 'mqtt';
import pg from 'pg';
import { afterAll, describe, expect, it } from 'vitest';
import type { IndexedMemoryPersistence } from '../../../server/broker/indexed-persistence.ts';
import { createTestDatabase } from '../../helpers/db.ts';
import { spawnIngestWorker, type IngestWorkerProcess } from '../../helpers/ingest-worker.ts';
import { freePort, scalar, seedWiring, startTestBroker, tempDir, waitFor } from './helpers.ts';

interface Relay {
  url: string;
  /** While true, what ingest writes (its PUBACKs) is dropped instead of passed to the broker. */
  hold: boolean;
  close(): Promise<void>;
}

/**
 * A TCP relay between ingest and the broker whose ingest → broker direction can be held: what
 * ingest writes then never reaches the broker, as when ingest dies between its commit and its
 * PUBACKs leaving the host. Either side's close closes the other.
 */
async function relay(upstream: number): Promise<Relay> {
  const pairs = new Set<[net.Socket, net.Socket]>();
  const port = await freePort();
  const server = net.createServer((down) => {
    const up = net.connect(upstream, '127.0.0.1');
    const pair: [net.Socket, net.Socket] = [down, up];
    pairs.add(pair);
    down.on('data', (b: Buffer) => {
      if (!r.hold) up.write(b);
    });
    up.on('data', (b: Buffer) => down.write(b));
    const end = () => {
      pairs.delete(pair);
      down.destroy();
      up.destroy();
    };
    down.on('close', end).on('error', end);
    up.on('close', end).on('error', end);
  });
  await new Promise<void>((res) => server.listen(port, '127.0.0.1', () => res()));
  const r: Relay = {
    url: `mqtt://127.0.0.1:${port}`,
    hold: false,
    async close() {
      for (const [a, b] of pairs) {
        a.destroy();
        b.destroy();
      }
      await new Promise<void>((res) => server.close(() => res()));
    },
  };
  return r;
}

/**
 * Issue 15 ("every poison message is one dead letter with its reason"): an ingest process is
 * SIGKILLed after it committed a batch — good samples and a poison message — but before its
 * PUBACKs reached the broker. The broker sends those messages again to the next ingest process
 * (MQTT 3.1.1 §4.4: a resumed session resends its unacknowledged QoS 1 messages), which knows
 * nothing of the first. The samples are absorbed by their primary key; the poison message is
 * recognised by its delivery identity (source, topic, digest of its bytes) and counted on the
 * stored dead letter instead of being stored a second time.
 */
describe('a poison message redelivered after an ingest SIGKILL before its PUBACK', () => {
  const cleanups: (() => Promise<unknown> | void)[] = [];
  afterAll(async () => {
    for (const f of cleanups.reverse()) await Promise.resolve(f()).catch(() => {});
  });

  it('is one dead letter seen twice, with its reason; the good samples are stored exactly once', { timeout: 120_000 }, async () => {
    const t = await createTestDatabase();
    cleanups.push(() => t.drop());
    const pool = new pg.Pool({ connectionString: t.url, max: 2 });
    cleanups.push(() => pool.end());
    const broker = await startTestBroker(await freePort());
    cleanups.push(() => broker.close());
    const link = await relay(broker.port);
    cleanups.push(() => link.close());
    const TAGS = 5;
    const { sourceId, tagIds } = await seedWiring(t.url, { kind: 'mqtt', sourceUrl: link.url, options: { topics: ['rd/#'], protocolVersion: 4 }, addresses: Array.from({ length: TAGS }, (_, i) => `rd/tag${i}`) });
    const clientId = `it-redeliver-${sourceId}`;
    const dataDir = tempDir('dl-redeliver');
    const start = (): IngestWorkerProcess => {
      const w = spawnIngestWorker({ DATABASE_URL: t.url, FLOCSTREAM_DATA_DIR: dataDir, INGEST_STATUS_MS: '500', INGEST_MQTT_CLIENT_ID: 'it-redeliver' });
      cleanups.push(() => w.kill());
      return w;
    };
    const queued = () => (broker.broker as unknown as { persistence: IndexedMemoryPersistence }).persistence.outgoingCount(clientId);
    const stored = () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1)`, [tagIds]);
    const letters = async () =>
      (await pool.query<{ reason: string; payload: string; times_seen: number; first: Date; last: Date | null }>(`SELECT reason, payload, times_seen, ts AS first, last_seen_at AS last FROM dead_letters WHERE source_id = $1`, [sourceId])).rows;

    let ingest = start();
    const pub = await mqtt.connectAsync(broker.url, { clientId: 'it-redeliver-pub', clean: true, protocolVersion: 4 });
    cleanups.push(() => pub.endAsync(true));
    const t0 = Date.UTC(2026, 11, 1);
    const sample = (k: number) => pub.publishAsync(`rd/tag${k % TAGS}`, JSON.stringify({ v: k, ts: new Date(t0 + k * 1_000).toISOString() }), { qos: 1 });
    // Warm-up: ingest subscribed and acknowledging through the relay.
    const warmUp = async () => {
      await sample(0);
      return stored();
    };
    await waitFor('ingest subscribed and storing', warmUp, (n) => n === 1, 60_000, 250);
    await waitFor('the warm-up acknowledged', async () => queued(), (n) => n === 0, 10_000);

    // PUBACKs held from here on: N good samples and one poison message (a JSON parse error whose text carries a NUL).
    link.hold = true;
    const N = 40;
    for (let k = 1; k <= N; k++) await sample(k);
    const poison = '{"v": 1, "poison": 7, \u0000}';
    await pub.publishAsync('rd/tag3', poison, { qos: 1 });
    await waitFor('samples committed', stored, (n) => n === N + 1, 30_000);
    await waitFor('the poison message committed', letters, (ls) => ls.length === 1, 30_000);
    // Committed, and none of it acknowledged to the broker.
    expect(queued()).toBe(N + 1);

    // SIGKILL: the broker keeps the session's unacknowledged messages; a fresh process resumes it.
    await ingest.kill();
    link.hold = false;
    ingest = start();
    await waitFor('the redelivery acknowledged', async () => queued(), (n) => n === 0, 60_000, 100);

    // Good samples: each once, with its value (sample k on tag k mod 5, value k at t0 + k s).
    expect(await stored()).toBe(N + 1);
    const rows = (await pool.query<{ value: number; ms: number }>(`SELECT value, (extract(epoch FROM ts) * 1000)::float8 AS ms FROM samples WHERE tag_id = ANY($1)`, [tagIds])).rows;
    expect(rows.map((x) => x.value).sort((a, b) => a - b)).toEqual(Array.from({ length: N + 1 }, (_, k) => k));
    expect(rows.every((x) => x.ms === t0 + x.value * 1_000)).toBe(true);
    expect(await scalar(pool, `SELECT sum(count) FROM rollup_1m WHERE tag_id = ANY($1)`, [tagIds])).toBe(N + 1);

    // The poison message: one dead letter, its reason the parse error, seen twice (the first
    // receipt and the redelivery), the second receipt later than the first.
    const [letter, ...more] = await letters();
    expect(more).toEqual([]);
    expect(letter!.reason).toMatch(/^invalid JSON: /);
    expect(letter!.payload).toBe('{"v": 1, "poison": 7, \\0}');
    expect(letter!.times_seen).toBe(2);
    expect(letter!.last!.getTime()).toBeGreaterThan(letter!.first.getTime());

    // The same bad payload published once more is one more arrival on the same row.
    await pub.publishAsync('rd/tag3', poison, { qos: 1 });
    await waitFor('the third arrival counted', letters, (ls) => ls.length === 1 && ls[0]!.times_seen === 3, 30_000);
    expect(await ingest.stop()).toBe(0);
  });
});
