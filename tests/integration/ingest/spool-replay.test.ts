import fs from 'node:fs';
import path from 'node:path';
import pg from 'pg';
import { afterAll, describe, expect, it } from 'vitest';
import { deadLetter, keyByDelivery, mqttDelivery, type Sample } from '../../../ingest/pipeline/types.ts';
import { BatchWriter } from '../../../ingest/sink/batch-writer.ts';
import { SampleStore } from '../../../ingest/sink/sample-store.ts';
import { Spool, type SpoolRecord } from '../../../ingest/sink/spool.ts';
import { createTestDatabase } from '../../helpers/db.ts';
import { scalar, seedWiring, silentLog, tempDir } from './helpers.ts';

/**
 * A run killed after its replay committed a spool file and before it deleted it: the next run
 * replays the file again. Samples are absorbed by the primary key; dead letters must not be
 * stored twice either (issue 15: every poison message is one dead letter).
 */
describe('spool replayed twice (a kill between commit and delete)', () => {
  const cleanups: (() => Promise<void> | void)[] = [];
  afterAll(async () => {
    for (const f of cleanups.reverse()) await Promise.resolve(f()).catch(() => {});
  });

  it('stores each sample and each dead letter once; identical dead letters of one message all stay', async () => {
    const t = await createTestDatabase();
    cleanups.push(() => t.drop());
    const { sourceId, tagIds } = await seedWiring(t.url, { kind: 'mqtt', sourceUrl: 'mqtt://127.0.0.1:1', addresses: ['r/a'] });
    const dir = tempDir('spool-twice');
    const spoolDir = path.join(dir, 'spool');
    const at = Date.UTC(2026, 2, 3, 4, 5, 6, 789);
    // Three records of 10 samples and 2 dead letters; record 2's two dead letters are identical
    // (two equal bad items of one batch message, received together): both are real rows. Keyed
    // as the MQTT handler keys a message's letters.
    const records: SpoolRecord[] = [1, 2, 3].map((k) => {
      const samples: Sample[] = Array.from({ length: 10 }, (_, i) => ({ tagId: tagIds[0]!, ts: at + k * 1_000 + i, value: k * 10 + i, quality: 0 }));
      const bad = (n: number) => deadLetter(sourceId, 'r/a', `{"v": "bad ${k === 2 ? 0 : n}" \u0000`, `Unexpected token in JSON (${k === 2 ? 0 : n})`, at + k * 1_000);
      const deadLetters = [bad(1), bad(2)];
      keyByDelivery(deadLetters, mqttDelivery('r/a', Buffer.from(`message ${k}`)));
      return { samples, deadLetters };
    });
    const first = await Spool.open(spoolDir);
    for (const r of records) await first.append(r);
    await first.close();
    const kept = path.join(dir, 'before-replay');
    fs.cpSync(spoolDir, kept, { recursive: true });

    const pool = new pg.Pool({ connectionString: t.url, max: 1 });
    cleanups.push(() => pool.end());
    const counts = async () => ({
      samples: await scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1`, [tagIds[0]]),
      rollup: await scalar(pool, `SELECT sum(count) FROM rollup_1m WHERE tag_id = $1`, [tagIds[0]]),
      deadLetters: await scalar(pool, `SELECT count(*) FROM dead_letters WHERE source_id = $1`, [sourceId]),
      // A replay of what was committed is not an arrival: each letter stays seen once.
      seen: await scalar(pool, `SELECT sum(times_seen) FROM dead_letters WHERE source_id = $1`, [sourceId]),
    });
    const replayOnce = async () => {
      const store = new SampleStore(t.url, { retentionDays: 400 });
      const spool = await Spool.open(spoolDir);
      const writer = new BatchWriter(store, spool, { batchRows: 1_000, flushMs: 50, log: silentLog });
      await writer.flush(); // the start's replay
      expect(spool.fileCount).toBe(0);
      await writer.close();
      await store.close();
    };

    await replayOnce();
    expect(await counts()).toEqual({ samples: 30, rollup: 30, deadLetters: 6, seen: 6 });
    // The files back as they were before the delete: the next run replays them again.
    fs.rmSync(spoolDir, { recursive: true, force: true });
    fs.cpSync(kept, spoolDir, { recursive: true });
    await replayOnce();
    expect(await counts()).toEqual({ samples: 30, rollup: 30, deadLetters: 6, seen: 6 });
    const rows = (await pool.query(`SELECT payload, reason FROM dead_letters WHERE source_id = $1 ORDER BY id`, [sourceId])).rows;
    expect(rows.filter((r) => r.payload === '{"v": "bad 0" \\0')).toHaveLength(2);
  });
});
