import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pino from 'pino';
import { afterEach, describe, expect, it } from 'vitest';
import type { Sample } from '../../../ingest/pipeline/types.ts';
import { BatchWriter } from '../../../ingest/sink/batch-writer.ts';
import type { SampleStore, WriteResult } from '../../../ingest/sink/sample-store.ts';
import { Spool } from '../../../ingest/sink/spool.ts';

/** A stand-in for one database connection: each write waits as told, then commits or fails. */
const commitLog: number[] = [];

class FakeStore {
  committed: number[][] = [];
  constructor(private plan: (first: number) => { delayMs: number; fail?: Error }) {}
  async write(samples: readonly Sample[]): Promise<WriteResult> {
    const first = samples[0]?.value ?? -1;
    const { delayMs, fail } = this.plan(first);
    await new Promise((r) => setTimeout(r, delayMs));
    if (fail) throw fail;
    this.committed.push(samples.map((s) => s.value!));
    commitLog.push(first);
    return { inserted: samples.length, duplicates: 0, deadLetters: 0, deadLetterRepeats: 0, staged: false };
  }
}

const sample = (v: number): Sample => ({ tagId: 1, ts: v, value: v, quality: 0 });
const transient = () => Object.assign(new Error('Connection terminated unexpectedly'), { code: 'ECONNRESET' });
const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) fs.rmSync(d, { recursive: true, force: true });
});

async function setup(plan: (first: number) => { delayMs: number; fail?: Error }, lanes = 2, now?: () => number) {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'bw-'));
  dirs.push(dir);
  const spool = await Spool.open(dir);
  const stores = Array.from({ length: lanes }, () => new FakeStore(plan));
  const writer = new BatchWriter(stores as unknown as SampleStore[], spool, { batchRows: 1_000_000, flushMs: 10_000, log: pino({ level: 'silent' }), now });
  return { writer, stores, spool };
}

describe('BatchWriter with two database connections', () => {
  it('overlaps commits but acknowledges strictly in arrival order', async () => {
    // batch 0 is slow, batch 1 fast: 1 commits first, yet 0 is acknowledged first
    const { writer, stores } = await setup((first) => ({ delayMs: first === 0 ? 80 : 5 }));
    const acks: number[] = [];
    commitLog.length = 0;
    for (let b = 0; b < 4; b++) {
      writer.enqueue([sample(b * 10), sample(b * 10 + 1)], [], () => acks.push(b));
      void writer.flush();
    }
    await writer.flush();
    expect(acks).toEqual([0, 1, 2, 3]);
    const order = stores.flatMap((s) => s.committed.map((c) => c[0]));
    expect(order.sort((a, b) => a! - b!)).toEqual([0, 10, 20, 30]);
    // batch 1 (and 2, 3) committed on the second connection while batch 0 was still in flight
    expect(commitLog[commitLog.length - 1]).toBe(0);
    expect(commitLog.slice(0, 3).sort((a, b) => a - b)).toEqual([10, 20, 30]);
    expect(writer.stats.committedSamples).toBe(8);
    await writer.close();
  });

  it('a batch that fails while a later one commits is spooled in order, acknowledged in order, and replayed', async () => {
    let down = true;
    const { writer, stores, spool } = await setup((first) => (first === 0 && down ? { delayMs: 30, fail: transient() } : { delayMs: 1 }));
    const acks: number[] = [];
    writer.enqueue([sample(0)], [], () => acks.push(0));
    void writer.flush();
    writer.enqueue([sample(10)], [], () => acks.push(1));
    await writer.flush();
    expect(acks).toEqual([0, 1]);
    expect(writer.stats.spooledSamples).toBe(1);
    expect(spool.isEmpty).toBe(false);
    // the later batch's commit showed the database reachable again
    expect(writer.stats.dbState).toBe('up');
    down = false;
    await writer.flush(); // an empty flush replays the spool
    expect(spool.isEmpty).toBe(true);
    const all = stores.flatMap((s) => s.committed.flat()).sort((a, b) => a - b);
    expect(all).toEqual([0, 10]);
    expect(writer.stats.replayedSamples).toBe(1);
    await writer.close();
  });

  it('while anything is spooled, new batches wait their turn behind the replay (no early commit)', async () => {
    let down = true;
    const seen: number[] = [];
    // The writer's retry backoff on an injected clock: stepped past it instead of waited out.
    let clock_ms = 1_000_000;
    const { writer } = await setup(
      (first) => {
        seen.push(first);
        return down ? { delayMs: 1, fail: transient() } : { delayMs: 1 };
      },
      2,
      () => clock_ms,
    );
    writer.enqueue([sample(0)], []);
    await writer.flush();
    expect(writer.stats.spooledSamples).toBe(1);
    down = false;
    clock_ms += 250; // the first backoff after a failure
    seen.length = 0;
    writer.enqueue([sample(10)], []);
    await writer.flush();
    // the spooled batch went to the database before the new one
    expect(seen).toEqual([0, 10]);
    await writer.close();
  });
});

describe('BatchWriter backpressure', () => {
  it('reports pressure at the high-water mark, writes at once, and releases it once the backlog is down to half', async () => {
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'bw-'));
    dirs.push(dir);
    const spool = await Spool.open(dir);
    const store = new FakeStore(() => ({ delayMs: 40 }));
    const writer = new BatchWriter(store as unknown as SampleStore, spool, { batchRows: 10, flushMs: 10_000, maxBacklog: 30, log: pino({ level: 'silent' }) });
    const events: boolean[] = [];
    writer.onPressure((high) => events.push(high));
    for (let i = 0; i < 29; i++) writer.enqueue([sample(i)], []);
    expect(writer.underPressure).toBe(false);
    writer.enqueue([sample(29)], []);
    expect(writer.underPressure).toBe(true);
    expect(writer.stats.backlog).toBe(30);
    await writer.flush();
    expect(writer.underPressure).toBe(false);
    expect(events).toEqual([true, false]);
    expect(writer.stats.pressureEvents).toBe(1);
    await writer.close();
  });
});
