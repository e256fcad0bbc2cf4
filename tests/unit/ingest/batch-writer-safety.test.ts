import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pino from 'pino';
import { afterEach, describe, expect, it } from 'vitest';
import type { DeadLetter, Sample } from '../../../ingest/pipeline/types.ts';
import { BatchWriter } from '../../../ingest/sink/batch-writer.ts';
import type { SampleStore, WriteResult } from '../../../ingest/sink/sample-store.ts';
import { Spool } from '../../../ingest/sink/spool.ts';

/**
 * A stand-in for one database connection that refuses what PostgreSQL refuses, all-or-nothing
 * per call like a transaction: a timestamp before 4713 BC (SQLSTATE 22008, PostgreSQL
 * documentation "Date/Time Types": the lowest timestamptz), and NUL in text (22021). `down`
 * makes every write fail as a lost connection does.
 */
class RefusingStore {
  samples: Sample[] = [];
  deadLetters: DeadLetter[] = [];
  writes = 0;
  down = false;
  async write(samples: readonly Sample[], deadLetters: readonly DeadLetter[]): Promise<WriteResult> {
    this.writes++;
    await Promise.resolve();
    if (this.down) throw Object.assign(new Error('Connection terminated unexpectedly'), { code: 'ECONNRESET' });
    if (samples.some((s) => s.ts < PG_MIN_MS)) throw Object.assign(new Error('timestamp out of range'), { code: '22008' });
    if (deadLetters.some((d) => `${d.reason}${d.payload}${d.address}`.includes('\u0000'))) {
      throw Object.assign(new Error('invalid byte sequence for encoding "UTF8": 0x00'), { code: '22021' });
    }
    this.samples.push(...samples);
    this.deadLetters.push(...deadLetters);
    return { inserted: samples.length, duplicates: 0, deadLetters: deadLetters.length, deadLetterRepeats: 0, staged: false };
  }
}
/** 4713-11-24 BC 00:00 UTC, the lowest timestamptz (Julian day 0), in epoch ms. */
const PG_MIN_MS = -210_866_803_200_000;

const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) fs.rmSync(d, { recursive: true, force: true });
});

async function setup(opts: { maxBytes?: number; batchRows?: number } = {}) {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'bw-safety-'));
  dirs.push(dir);
  const spool = await Spool.open(dir, { ...(opts.maxBytes ? { maxBytes: opts.maxBytes } : {}) });
  const store = new RefusingStore();
  const writer = new BatchWriter([store as unknown as SampleStore], spool, { batchRows: opts.batchRows ?? 1_000_000, flushMs: 10_000, log: pino({ level: 'silent' }) });
  return { dir, spool, store, writer };
}

const good = (n: number, tags = 100): Sample[] => Array.from({ length: n }, (_, i) => ({ tagId: 1 + (i % tags), ts: 1_780_000_000_000 + Math.floor(i / tags) * 1_000, value: i, quality: 0 }));
const rejectedFiles = (dir: string) => (fs.existsSync(path.join(dir, 'rejected')) ? fs.readdirSync(path.join(dir, 'rejected')) : []);

async function until(what: string, ok: () => boolean, timeoutMs = 10_000): Promise<void> {
  const end = Date.now() + timeoutMs;
  while (!ok()) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 10));
  }
}

describe('BatchWriter: a bad row never costs its neighbours', () => {
  it('50 000 samples with one the database refuses: 49 999 stored, one dead letter with the reason, nothing spooled or quarantined', async () => {
    const { dir, store, writer, spool } = await setup();
    const batch = good(50_000);
    batch[31_337] = { tagId: 7, ts: -3e14, value: 1, quality: 0 }; // year ≈ −7537: out of range
    let acks = 0;
    writer.enqueue(batch, [], () => acks++);
    await writer.flush();
    expect(acks).toBe(1);
    expect(store.samples).toHaveLength(49_999);
    expect(new Set(store.samples.map((s) => s.value)).size).toBe(49_999);
    expect(store.samples.some((s) => s.ts < PG_MIN_MS)).toBe(false);
    expect(store.deadLetters).toHaveLength(1);
    expect(store.deadLetters[0]!.reason).toBe('sample refused by the database (22008: timestamp out of range)');
    expect(JSON.parse(store.deadLetters[0]!.payload)).toEqual({ tagId: 7, ts: '-300000000000000', value: '1', quality: 0 });
    expect(writer.stats).toMatchObject({ committedSamples: 49_999, committedDeadLetters: 1, refusedSamples: 1, quarantinedRows: 0, spooledSamples: 0, dbState: 'up' });
    // bisection: at most 2 commits per level of a binary split of 50 000 (16 levels), plus the dead letter
    expect(store.writes).toBeLessThanOrEqual(1 + 2 * 16 + 1);
    expect(spool.isEmpty).toBe(true);
    expect(rejectedFiles(dir)).toEqual([]);
    await writer.close();
  });

  it('a dead letter carrying NUL made by hand (not through deadLetter()) is stored in plain form; the batch is committed', async () => {
    const { dir, store, writer } = await setup();
    const nul: DeadLetter = { ts: 1, sourceId: 3, address: 'plant/x', payload: '{"v":tru\u0000}', payloadBytes: 10, reason: 'invalid JSON: Unexpected token \'\u0000\'', key: 'made by hand' };
    writer.enqueue(good(1_000), [nul], () => {});
    await writer.flush();
    expect(store.samples).toHaveLength(1_000);
    expect(store.deadLetters).toHaveLength(1);
    expect(store.deadLetters[0]!.reason).toMatch(/^dead letter refused by the database \(22021: invalid byte sequence/);
    expect(writer.stats.refusedDeadLetters).toBe(1);
    expect(rejectedFiles(dir)).toEqual([]);
    await writer.close();
  });

  it('a spooled batch with a refused row is replayed the same way: good rows stored, the file deleted, quarantine empty', async () => {
    const { dir, store, writer, spool } = await setup();
    const batch = good(2_000);
    batch[1_999] = { tagId: 1, ts: -1e15, value: 5, quality: 0 };
    store.down = true;
    writer.enqueue(batch, []);
    await writer.flush();
    expect(writer.stats.spooledSamples).toBe(2_000);
    store.down = false;
    // Replay waits out the backoff (250 ms after the first failure); an empty flush tries it.
    const end = Date.now() + 10_000;
    while (!spool.isEmpty && Date.now() < end) await writer.flush().then(() => new Promise((r) => setTimeout(r, 20)));
    expect(spool.isEmpty).toBe(true);
    expect(store.samples).toHaveLength(1_999);
    expect(store.deadLetters).toHaveLength(1);
    expect(rejectedFiles(dir)).toEqual([]);
    expect(fs.readdirSync(dir).filter((f) => f.endsWith('.spool'))).toEqual([]);
    await writer.close();
  });
});

describe('BatchWriter: spool size cap', () => {
  it('at the cap the next batch is held unacknowledged under backpressure, nothing is dropped, and it goes in once the database is back', async () => {
    // One spooled record of 500 samples is ≈ 16 kB: the first one reaches a 1 kB cap.
    const { store, writer, spool } = await setup({ maxBytes: 1_000 });
    const pressure: boolean[] = [];
    writer.onPressure((h) => pressure.push(h));
    store.down = true;
    const acked: string[] = [];
    writer.enqueue(good(500), [], () => acked.push('a'));
    await writer.flush();
    expect(acked).toEqual(['a']); // spooled (fsync'd), then acknowledged
    expect(spool.capReached).toBe(true);
    expect(writer.underPressure).toBe(true);
    expect(pressure).toEqual([true]);

    const b = good(500).map((s) => ({ ...s, ts: s.ts + 3_600_000 }));
    writer.enqueue(b, [], () => acked.push('b'));
    const flushed = writer.flush();
    await until('batch b held at the cap', () => writer.stats.spoolCapHolds === 1);
    // held: not acknowledged, not spooled, not dropped
    expect(acked).toEqual(['a']);
    expect(spool.fileCount).toBe(1);
    expect(writer.stats.spooledSamples).toBe(500);
    expect(writer.stats.backlog).toBe(500);
    expect(writer.underPressure).toBe(true);

    store.down = false;
    await flushed;
    expect(acked).toEqual(['a', 'b']);
    expect(store.samples).toHaveLength(1_000);
    expect(spool.isEmpty).toBe(true);
    expect(writer.underPressure).toBe(false);
    expect(pressure).toEqual([true, false]);
    await writer.close();
  });
});
