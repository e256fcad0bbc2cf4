import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pg from 'pg';
import pino from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { IngestStatus } from '../../ingest/ingest-service.ts';
import { BatchWriter } from '../../ingest/sink/batch-writer.ts';
import { SampleStore } from '../../ingest/sink/sample-store.ts';
import { Spool, type SpoolRecord } from '../../ingest/sink/spool.ts';
import { WorkerRegistry } from '../../ingest/worker-registry.ts';
import { startBalanceEngine } from '../../server/jobs/balance-engine.ts';
import { SETTINGS } from '../../shared/contracts/settings.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { waitFor } from '../helpers/wait.ts';
import { FIXTURE_VALUES, seedFixturePlant, writeSignals } from './balance-fixture.ts';

/**
 * The spool conditions ingest reports (ingest/sink/spool.ts) become `ingest-spool` alarms of the
 * API's engine (server/services/alarm.service.ts spoolAlarmConditions), through PostgreSQL only:
 * ingest's own spool, writer and worker registry write the heartbeat row, the balance engine
 * (on a clock the test moves, for the ISA-18.2 on-delay) raises and clears.
 */
const ON_DELAY_S = SETTINGS['alarm.on_delay_s'].default;
const log = pino({ level: 'silent' });

describe('ingest-spool alarms: raised from the worker status, cleared when the condition ends', () => {
  let h: TestApp;
  const dirs: string[] = [];
  const stops: Array<() => Promise<void> | void> = [];
  let plants = 0;

  beforeAll(async () => {
    h = await createTestApp();
  });
  afterAll(async () => {
    for (const s of stops.reverse()) await s();
    for (const d of dirs) fs.rmSync(d, { recursive: true, force: true });
    await h.close();
  });

  /** A fixture plant, an engine on a stepped clock, and ingest's writer over a spool of its own. */
  async function setup(maxBytes?: number) {
    const { plantId, tagIds } = await seedFixturePlant(h.ctx, { code: `sp${++plants}` });
    let now_ms = Math.floor(Date.now() / 1000) * 1000;
    const engine = await startBalanceEngine(h.ctx, { schedule: false, mailCatcher: false, now: () => now_ms });
    stops.push(() => engine.stop());
    const dataDir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-spool-alarm-'));
    dirs.push(dataDir);
    const spoolDir = path.join(dataDir, 'spool');
    const pool = new pg.Pool({ connectionString: h.t.url, max: 2 });
    stops.push(() => pool.end());
    const store = new SampleStore(h.t.url, { retentionDays: 400 });
    stops.push(() => store.close());
    // Heartbeat period of a minute: the row stays fresh (running) for the whole test.
    const registry = new WorkerRegistry(pool, new Date(), 60_000);
    return {
      plantId,
      spoolDir,
      /** Ingest's writer over the spool; `databaseDown`: its connection points at a closed port, as while PostgreSQL is stopped. */
      async writer(opts: { databaseDown?: boolean } = {}) {
        const spool = await Spool.open(spoolDir, maxBytes ? { maxBytes } : {});
        const lane = opts.databaseDown ? new SampleStore('postgres://ingest:x@127.0.0.1:1/none', { retentionDays: 400 }) : store;
        const writer = new BatchWriter(lane, spool, { batchRows: 1_000, flushMs: 60_000, log });
        stops.push(() => writer.close());
        return { spool, writer };
      },
      /** What ingest writes with each heartbeat (ingest-service.ts status()). */
      async beat(writer: BatchWriter) {
        const status: IngestStatus = { samplesPerSec: 0, lagMs: 0, spool: writer.spoolStatus, writer: { ...writer.stats }, sources: [], loadError: null };
        await registry.beat(status);
      },
      /** Steps the clock by `s`, writes fresh signals, runs the engine once. */
      async run(s: number) {
        now_ms += s * 1000;
        await writeSignals(h.ctx, tagIds, FIXTURE_VALUES, { history_h: 1, at: new Date(now_ms) });
        await engine.runOnce(plantId);
      },
      /** This plant's ingest-spool alarms about this test's spool (every plant gets every spool's alarms). */
      alarms: async () => (await h.ctx.db.pool.query(`SELECT * FROM alarms WHERE plant_id = $1 AND rule = 'ingest-spool' AND strpos(target, $2) > 0 ORDER BY id`, [plantId, spoolDir])).rows,
    };
  }

  /** Record k: 10 samples of the fixture's first tag id at distinct times. */
  function record(tagId: number, k: number): SpoolRecord {
    return { samples: Array.from({ length: 10 }, (_, i) => ({ tagId, ts: Date.UTC(2026, 0, 5) + (k * 10 + i) * 1000, value: k * 10 + i, quality: 0 })), deadLetters: [] };
  }

  it('a spool at its size cap raises one priority-1 alarm naming the folder and the bytes; it clears once the backlog is below the cap', async () => {
    // A 10-sample record is about 230 bytes: two reach a cap of 400 bytes.
    const p = await setup(400);
    const down = await p.writer({ databaseDown: true });
    const tagId = (await h.ctx.db.pool.query(`SELECT min(id) AS id FROM tags WHERE plant_id = $1`, [p.plantId])).rows[0].id as number;
    // PostgreSQL down: each flushed batch goes to the spool, until the cap.
    for (const k of [1, 2]) {
      const r = record(tagId, k);
      down.writer.enqueue(r.samples, r.deadLetters);
      await down.writer.flush();
    }
    expect(down.spool.capReached).toBe(true);
    expect(down.writer.stats.spooledSamples).toBe(20);
    const bytes = down.spool.pendingBytes;
    await p.beat(down.writer);
    await p.run(0);
    expect(await p.alarms()).toEqual([]); // ISA-18.2 on-delay
    await p.run(ON_DELAY_S);
    const [a, ...more] = await p.alarms();
    expect(more).toEqual([]);
    expect(a).toMatchObject({ state: 'raised', priority: 1, target: `spool:${os.hostname()}:${p.spoolDir}`, value: bytes, limit: 400 });
    expect(a.message).toContain(p.spoolDir);
    expect(a.message).toContain(`holds ${bytes} bytes to replay and reached its cap of 400 bytes`);

    // PostgreSQL back (ingest restarted on it here): the writer's replay empties the spool.
    await down.writer.close();
    const { spool, writer } = await p.writer();
    await writer.flush();
    expect(spool.capReached).toBe(false);
    expect(spool.fileCount).toBe(0);
    await p.beat(writer);
    await p.run(10);
    const [cleared] = await p.alarms();
    expect(cleared).toMatchObject({ id: a.id, state: 'cleared' });
    expect(await h.ctx.db.pool.query(`SELECT count(*)::int AS n FROM samples WHERE tag_id = $1 AND ts < '2026-01-06'`, [tagId]).then((r) => r.rows[0].n)).toBe(20);
  });

  it('an unreadable spool file raises an alarm naming the file, its size and the error; moving it out of the spool folder clears it', async () => {
    const p = await setup();
    const tagId = (await h.ctx.db.pool.query(`SELECT min(id) AS id FROM tags WHERE plant_id = $1`, [p.plantId])).rows[0].id as number;
    // A previous run's spool whose second record is damaged (a flipped byte: its CRC-32 fails) with a third after it.
    const first = await Spool.open(p.spoolDir);
    for (let k = 1; k <= 3; k++) await first.append(record(tagId, k));
    await first.close();
    const [name] = fs.readdirSync(p.spoolDir).filter((f) => f.endsWith('.spool'));
    const file = path.join(p.spoolDir, name!);
    const buf = fs.readFileSync(file);
    const second = 8 + buf.readUInt32LE(0);
    buf.writeUInt8(buf.readUInt8(second + 20) ^ 0xff, second + 20);
    fs.writeFileSync(file, buf);

    const { writer } = await p.writer();
    await writer.flush(); // the start's replay: record 1 committed, the file kept and reported
    expect(writer.spoolStatus.unreadable).toEqual([{ file, bytes: buf.length, atByte: second, error: `bad checksum in the record at byte ${second}` }]);
    await p.beat(writer);
    await p.run(0);
    await p.run(ON_DELAY_S);
    const [a, ...more] = await p.alarms();
    expect(more).toEqual([]);
    expect(a).toMatchObject({ state: 'raised', priority: 2, target: `spool-file:${os.hostname()}:${file}`, value: buf.length });
    expect(a.message).toContain(`Spool file ${file} (${buf.length} bytes)`);
    expect(a.message).toContain(`from byte ${second} (bad checksum`);

    // Still there a while later: still in alarm.
    await p.beat(writer);
    await p.run(10);
    expect((await p.alarms())[0]).toMatchObject({ id: a.id, state: 'raised' });

    // The operator moves it away for inspection (README, Cautions): ingest forgets it within a second.
    fs.mkdirSync(path.join(p.spoolDir, 'damaged'));
    fs.renameSync(file, path.join(p.spoolDir, 'damaged', name!));
    await waitFor(() => writer.spoolStatus, (s) => s.unreadable.length === 0 && s.files === 0, { what: 'ingest to forget the moved file', timeout_ms: 10_000 });
    await p.beat(writer);
    await p.run(10);
    const [cleared] = await p.alarms();
    expect(cleared).toMatchObject({ id: a.id, state: 'cleared' });
    expect(await h.ctx.db.pool.query(`SELECT count(*)::int AS n FROM samples WHERE tag_id = $1 AND ts < '2026-01-06'`, [tagId]).then((r) => r.rows[0].n)).toBe(10);
  });
});
