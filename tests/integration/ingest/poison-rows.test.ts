import fs from 'node:fs';
import path from 'node:path';
import mqtt from 'mqtt';
import pg from 'pg';
import { afterAll, describe, expect, it } from 'vitest';
import { IngestService } from '../../../ingest/ingest-service.ts';
import { deadLetter, type DeadLetter, type Sample } from '../../../ingest/pipeline/types.ts';
import { BatchWriter } from '../../../ingest/sink/batch-writer.ts';
import { SampleStore } from '../../../ingest/sink/sample-store.ts';
import { Spool } from '../../../ingest/sink/spool.ts';
import { createTestDatabase } from '../../helpers/db.ts';
import { freePort, ingestConfig, scalar, seedWiring, silentLog, startTestBroker, tempDir, waitFor } from './helpers.ts';

/**
 * Issue 15: one bad row must not cost its neighbours. Real PostgreSQL decides what it refuses:
 * NUL in text (SQLSTATE 22021, documentation "Character Types") and a timestamp before
 * 4713 BC (22008, documentation "Date/Time Types": the range of timestamptz).
 */
describe('poison rows against real PostgreSQL', () => {
  const cleanups: (() => Promise<unknown> | void)[] = [];
  afterAll(async () => {
    for (const f of cleanups.reverse()) await Promise.resolve(f()).catch(() => {});
  });

  it('a batch of 50 000 with one out-of-range sample and NUL-carrying dead letters: 49 999 stored, rollups exact, one dead letter per bad row, quarantine empty', async () => {
    const t = await createTestDatabase();
    cleanups.push(() => t.drop());
    const pool = new pg.Pool({ connectionString: t.url, max: 2 });
    cleanups.push(() => pool.end());
    const { tagIds } = await seedWiring(t.url, { kind: 'mqtt', sourceUrl: 'mqtt://127.0.0.1:1', addresses: Array.from({ length: 100 }, (_, i) => `p/tag${i}`) });
    const dataDir = tempDir('poison-batch');
    const spool = await Spool.open(path.join(dataDir, 'spool'));
    const lanes = [new SampleStore(t.url, { retentionDays: 400 }), new SampleStore(t.url, { retentionDays: 400 })];
    const writer = new BatchWriter(lanes, spool, { batchRows: 1_000_000, flushMs: 10_000, log: silentLog });
    cleanups.push(async () => {
      await writer.close();
      for (const l of lanes) await l.close();
    });

    const t0 = Date.UTC(2026, 2, 1);
    const batch: Sample[] = Array.from({ length: 50_000 }, (_, i) => ({ tagId: tagIds[i % 100]!, ts: t0 + Math.floor(i / 100) * 1_000, value: i, quality: 0 }));
    const poisonAt = 27_183;
    batch[poisonAt] = { tagId: tagIds[0]!, ts: -3e14, value: -1, quality: 0 }; // year ≈ −7537
    // The parse error of a payload carrying NUL quotes it: the message of issue 15.
    const payload = Buffer.from('{"v":tru\u0000}');
    let reason = '';
    try {
      JSON.parse(payload.toString());
    } catch (err) {
      reason = `invalid JSON: ${(err as Error).message}`;
    }
    const dls: DeadLetter[] = [
      deadLetter(1, 'p/tag0', payload, reason),
      // made by hand, as a spool written by an older version holds it: the store cleans it too
      { ts: t0, sourceId: 1, address: 'p/\u0000', payload: '\u0000', payloadBytes: 1, reason: `raw ${reason} \uD800`, key: 'made by hand' },
    ];
    let acks = 0;
    writer.enqueue(batch, dls, () => acks++);
    await writer.flush();

    const range = [tagIds, new Date(t0), new Date(t0 + 86_400_000)];
    expect(acks).toBe(1);
    expect(await scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range)).toBe(49_999);
    expect(await scalar(pool, `SELECT count(*) FROM samples`)).toBe(49_999);
    // the poison row's value (−1) is absent, every other value 0 … 49 999 present once: sum = n(n−1)/2 − 27 183
    expect(await scalar(pool, `SELECT sum(value) FROM samples`)).toBe((50_000 * 49_999) / 2 - poisonAt);
    expect(await scalar(pool, `SELECT sum(count) FROM rollup_1m WHERE tag_id = ANY($1)`, [tagIds])).toBe(49_999);
    expect(await scalar(pool, `SELECT sum(count) FROM rollup_1h WHERE tag_id = ANY($1)`, [tagIds])).toBe(49_999);
    const rows = (await pool.query<{ reason: string; payload: string; address: string | null }>(`SELECT reason, payload, address FROM dead_letters ORDER BY id`)).rows;
    expect(rows).toHaveLength(3);
    const refused = rows.filter((r) => r.reason.startsWith('sample refused by the database'));
    expect(refused).toHaveLength(1);
    expect(refused[0]!.reason).toMatch(/^sample refused by the database \(22008: .*out of range/);
    expect(JSON.parse(refused[0]!.payload)).toEqual({ tagId: tagIds[0], ts: '-300000000000000', value: '-1', quality: 0 });
    expect(rows.filter((r) => r.reason.includes('invalid JSON')).map((r) => r.address)).toEqual(['p/tag0', 'p/\\0']);
    expect(writer.stats).toMatchObject({ committedSamples: 49_999, refusedSamples: 1, quarantinedRows: 0, spooledSamples: 0, dbState: 'up' });
    expect(fs.existsSync(path.join(dataDir, 'spool', 'rejected'))).toBe(false);
    expect(spool.isEmpty).toBe(true);
  });

  it('MQTT: good messages around a NUL-carrying one every few messages are all stored; the poison payload, sent 20 times, is one dead letter seen 20 times; nothing spooled or quarantined', async () => {
    const t = await createTestDatabase();
    cleanups.push(() => t.drop());
    const pool = new pg.Pool({ connectionString: t.url, max: 2 });
    cleanups.push(() => pool.end());
    const broker = await startTestBroker(await freePort());
    cleanups.push(() => broker.close());
    const TAGS = 10;
    const { tagIds } = await seedWiring(t.url, { kind: 'mqtt', sourceUrl: broker.url, options: { topics: ['n/#'] }, addresses: Array.from({ length: TAGS }, (_, i) => `n/tag${i}`) });
    const dataDir = tempDir('poison-mqtt');
    const svc = await IngestService.start(ingestConfig(t.url, dataDir), silentLog);
    cleanups.push(() => svc.stop());
    await waitFor('connected', async () => svc.status().sources[0]?.state, (s) => s === 'connected');
    const pub = await mqtt.connectAsync(broker.url, { clientId: 'poison-pub', clean: false, protocolVersion: 4 });
    cleanups.push(() => pub.endAsync());

    const N = 4_000;
    const POISON = 20; // one after every 200 good messages, spread over the batches
    const t0 = Date.UTC(2026, 2, 2);
    for (let i = 0; i < N; i += 200) {
      await Promise.all(
        Array.from({ length: 200 }, (_, j) => {
          const k = i + j;
          return pub.publishAsync(`n/tag${k % TAGS}`, JSON.stringify({ v: k, ts: new Date(t0 + Math.floor(k / TAGS) * 1_000).toISOString() }), { qos: 1 });
        }),
      );
      await pub.publishAsync(`n/tag${i % TAGS}`, Buffer.from('{"v":tru\u0000}'), { qos: 1 });
    }
    const range = [tagIds, new Date(t0), new Date(t0 + 86_400_000)];
    await waitFor('all stored', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range), (n) => n >= N, 30_000);
    // The same bad payload on the same topic is one dead letter, seen as often as it came: every
    // poison message goes to n/tag0 (i mod 10 for i = 0, 200, 400, …), so one row seen 20 times.
    await waitFor('all dead letters', () => scalar(pool, `SELECT coalesce(sum(times_seen), 0) FROM dead_letters`), (n) => n >= POISON, 10_000);
    expect(await scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range)).toBe(N);
    expect(await scalar(pool, `SELECT sum(times_seen) FROM dead_letters WHERE reason LIKE 'invalid JSON:%' AND strpos(reason, '\\0') > 0`)).toBe(POISON);
    expect(await scalar(pool, `SELECT sum(times_seen) FROM dead_letters`)).toBe(POISON);
    expect(await scalar(pool, `SELECT count(*) FROM dead_letters`)).toBe(1);
    expect(svc.writer.stats.spooledSamples).toBe(0);
    expect(fs.existsSync(path.join(dataDir, 'spool', 'rejected'))).toBe(false);
    expect(svc.status().spool).toMatchObject({ files: 0, bytes: 0, pendingBytes: 0, unreadable: [], capReached: false });
  });
});
