import type { Logger } from 'pino';
import { DEAD_LETTER_REASON_MAX, pgText } from '../pipeline/pg-text.ts';
import { DEAD_LETTER_PAYLOAD_MAX, deliveryKey, type DeadLetter, type Sample } from '../pipeline/types.ts';
import { isPermanentRowError, isTransientDbError, type SampleStore } from './sample-store.ts';
import type { Spool, SpoolRecord, SpoolStatus } from './spool.ts';

/** Called once the items it was enqueued with are committed or durably spooled. */
export type Ack = () => void;

export interface WriterStats {
  committedSamples: number;
  committedDeadLetters: number;
  /** Arrivals of a dead letter already stored (a redelivered or republished bad message), counted on its row. */
  repeatedDeadLetters: number;
  duplicateSamples: number;
  spooledSamples: number;
  replayedSamples: number;
  flushes: number;
  stagedFlushes: number;
  pendingSamples: number;
  /** Samples and dead letters received but not yet committed or spooled (pending plus flushing). */
  backlog: number;
  /** Times intake was paused because the backlog reached the high-water mark. */
  pressureEvents: number;
  dbState: 'up' | 'down';
  lastError: string | null;
  /** Receive → commit (or spool) delay of the oldest item of the last flush [ms]. */
  lastLagMs: number;
  /** Samples the database refused one by one (after splitting), stored as dead letters instead. */
  refusedSamples: number;
  /** Dead letters the database refused one by one, stored again in a plain form. */
  refusedDeadLetters: number;
  /** Single refused rows kept in `spool/rejected/` because even their plain dead letter was refused. */
  quarantinedRows: number;
  /** Extra commits made by splitting batches that failed with a permanent (row) error. */
  splitCommits: number;
  /** Times a batch was held unacknowledged because the spool was at its size cap. */
  spoolCapHolds: number;
}

/** Part of a batch. */
interface Part {
  samples: Sample[];
  deadLetters: DeadLetter[];
}

/**
 * A commit that stopped for a reason other than its rows (the database went away): `rest` is
 * what was not committed yet (the parts a split had already committed are not in it).
 */
class NotCommitted extends Error {
  constructor(
    override readonly cause: unknown,
    readonly rest: Part,
  ) {
    super((cause as Error)?.message ?? String(cause));
  }
}

const causeOf = (err: unknown): unknown => (err instanceof NotCommitted ? err.cause : err);

const codeOf = (err: unknown): string => {
  const c = (err as { code?: unknown })?.code;
  return typeof c === 'string' ? `${c}: ` : '';
};

interface Pending {
  samples: Sample[];
  deadLetters: DeadLetter[];
  acks: Ack[];
  since: number;
}

function empty(): Pending {
  return { samples: [], deadLetters: [], acks: [], since: 0 };
}

/**
 * Buffers samples and dead letters and writes them in batches, flushed by size or by age.
 * While the database is up and the spool empty, a batch's commit starts at once on one of the
 * given connections (SampleStores), so commits may overlap; what follows a commit — spooling
 * if it failed, then the acks — runs one batch at a time in flush order, so acks are called in
 * arrival order and only after commit — which is what lets the MQTT connector send PUBACKs in
 * the order the PUBLISH packets were received (MQTT 5.0 §4.6, message ordering).
 *
 * When the database fails with a transient error the batch is appended to the spool (fsync'd)
 * and then acknowledged; while the spool holds anything, every flush first tries to replay it,
 * so replayed batches always precede newer ones. Database attempts back off while it is down.
 * A batch whose commit was already under way when the database failed keeps its place: it is
 * spooled in flush order behind the ones before it.
 */
export class BatchWriter {
  private pending = empty();
  private timer: NodeJS.Timeout | null = null;
  private chain: Promise<void> = Promise.resolve();
  private retryAt = 0;
  private backoffMs = 250;
  private readonly now: () => number;
  private closed = false;
  private replayTimer: NodeJS.Timeout;
  readonly stats: WriterStats = {
    committedSamples: 0,
    committedDeadLetters: 0,
    repeatedDeadLetters: 0,
    duplicateSamples: 0,
    spooledSamples: 0,
    replayedSamples: 0,
    flushes: 0,
    stagedFlushes: 0,
    pendingSamples: 0,
    backlog: 0,
    pressureEvents: 0,
    dbState: 'up',
    lastError: null,
    lastLagMs: 0,
    refusedSamples: 0,
    refusedDeadLetters: 0,
    quarantinedRows: 0,
    splitCommits: 0,
    spoolCapHolds: 0,
  };
  /** Called after each commit with the samples committed (for rates in the status file). */
  onCommit: ((n: number) => void) | null = null;
  /** Items in batches handed to the chain and not finished yet. */
  private flushing = 0;
  private pressured = false;
  /** Database connections not in use, and the writes waiting for one (first come, first served). */
  private free: SampleStore[];
  private waiting: ((s: SampleStore) => void)[] = [];
  private pressureListeners = new Set<(high: boolean) => void>();

  constructor(
    stores: SampleStore | readonly SampleStore[],
    private spool: Spool,
    private opts: {
      batchRows: number;
      flushMs: number;
      log: Logger;
      maxBacklog?: number;
      /** The clock the retry backoff is judged by [ms] (default Date.now; tests step one instead of waiting it out). */
      now?: () => number;
    },
  ) {
    this.now = opts.now ?? Date.now;
    this.free = Array.isArray(stores) ? [...stores] : [stores as SampleStore];
    if (this.free.length === 0) throw new Error('BatchWriter needs at least one SampleStore');
    // Without new traffic nothing would flush: retry a non-empty spool by itself.
    this.replayTimer = setInterval(() => {
      if (!this.spool.isEmpty && this.now() >= this.retryAt) void this.flush();
      if (this.spool.status().unreadable.length > 0) void this.forgetRemovedSpoolFiles();
    }, 1_000);
    this.replayTimer.unref();
  }

  get spoolBytes(): number {
    return this.spool.sizeBytes;
  }

  get spoolFiles(): number {
    return this.spool.fileCount;
  }

  /** The spool as ingest's status reports it; unreadable files and a reached cap raise the API's `ingest-spool` alarms. */
  get spoolStatus(): SpoolStatus {
    return this.spool.status();
  }

  enqueue(samples: readonly Sample[], deadLetters: readonly DeadLetter[], ack?: Ack): void {
    const p = this.pending;
    if (p.samples.length === 0 && p.deadLetters.length === 0 && p.acks.length === 0) p.since = Date.now();
    for (const s of samples) p.samples.push(s);
    for (const d of deadLetters) p.deadLetters.push(d);
    if (ack) p.acks.push(ack);
    this.stats.pendingSamples = p.samples.length;
    this.updatePressure();
    if (p.samples.length + p.deadLetters.length >= this.opts.batchRows) this.flushSoon(0);
    else if (!this.timer) this.flushSoon(this.opts.flushMs);
  }

  /**
   * Backpressure: sources stop taking new messages while the backlog is at or above the
   * high-water mark (`maxBacklog`, default four batches) and resume once it is down to half.
   * Without it a publisher faster than the database grows the process without bound; with it
   * the excess waits in the broker's queue. (The MQTT connector listens; the OPC UA connector
   * does not pause its subscriptions — plant OPC UA rates are far below the writer's.)
   * A spool at its size cap raises the same signal: the batch that found it full is held,
   * unacknowledged, until the database or the spool takes it.
   */
  onPressure(fn: (high: boolean) => void): () => void {
    this.pressureListeners.add(fn);
    return () => this.pressureListeners.delete(fn);
  }

  get underPressure(): boolean {
    return this.pressured;
  }

  private updatePressure(): void {
    const backlog = this.pending.samples.length + this.pending.deadLetters.length + this.flushing;
    this.stats.backlog = backlog;
    const high = this.opts.maxBacklog ?? 4 * this.opts.batchRows;
    const next = this.spool.capReached || (this.pressured ? backlog > high / 2 : backlog >= high);
    if (next === this.pressured) return;
    this.pressured = next;
    if (next) {
      this.stats.pressureEvents++;
      // Nothing more is coming in for now: write what is pending instead of waiting for the timer.
      if (this.pending.samples.length + this.pending.deadLetters.length > 0) this.flushSoon(0);
    }
    for (const fn of this.pressureListeners) fn(next);
  }

  private flushSoon(delay: number): void {
    if (this.timer) clearTimeout(this.timer);
    this.timer = setTimeout(() => {
      this.timer = null;
      void this.flush();
    }, delay);
  }

  /** Flushes what is pending now; resolves when it is committed or spooled. */
  flush(): Promise<void> {
    const batch = this.pending;
    this.pending = empty();
    this.stats.pendingSamples = 0;
    if (this.timer) {
      clearTimeout(this.timer);
      this.timer = null;
    }
    const items = batch.samples.length + batch.deadLetters.length;
    this.flushing += items;
    // With the database up and nothing spooled, the commit starts now on a connection of its
    // own, overlapping the batches before it; what is done with the outcome (acks, spooling on
    // failure) still happens strictly in flush order on the chain. Otherwise the batch waits
    // its turn and goes the serial way (spool replay first), as before.
    const early = items > 0 && this.spool.isEmpty && this.stats.dbState === 'up' && this.now() >= this.retryAt ? this.commitOnLane(batch) : null;
    this.chain = this.chain.then(async () => {
      try {
        await this.write(batch, early);
      } finally {
        this.flushing -= items;
        this.updatePressure();
      }
    });
    return this.chain;
  }

  /** Resolves with null once committed, or with the error that kept it out of the database. */
  private async commitOnLane(b: Pending): Promise<unknown> {
    try {
      await this.commitSplitting(b);
      return null;
    } catch (err) {
      return err ?? new Error('commit failed');
    }
  }

  private async write(b: Pending, early: Promise<unknown> | null = null): Promise<void> {
    const hasData = b.samples.length > 0 || b.deadLetters.length > 0;
    try {
      if (early) {
        const err = await early;
        if (err === null) this.markUp();
        else {
          this.markDown(causeOf(err));
          await this.toSpool(err instanceof NotCommitted ? err.rest : b);
        }
      } else if (!this.spool.isEmpty && this.now() >= this.retryAt) await this.replaySpool();
      if (hasData && !early) {
        if (!this.spool.isEmpty || this.now() < this.retryAt) {
          await this.toSpool(b);
        } else {
          try {
            await this.commitSplitting(b);
            this.markUp();
          } catch (err) {
            this.markDown(causeOf(err));
            await this.toSpool(err instanceof NotCommitted ? err.rest : b);
          }
        }
      }
      this.stats.flushes++;
      if (b.since) this.stats.lastLagMs = Date.now() - b.since;
      for (const a of b.acks) a();
    } catch (err) {
      // Neither the database nor the spool took the batch: do not acknowledge it. The source
      // keeps it (MQTT redelivers unacknowledged QoS 1 messages on reconnect, MQTT 5.0 §4.4).
      this.stats.lastError = `spool write failed: ${(err as Error).message}`;
      this.opts.log.error({ err }, 'batch could be neither committed nor spooled; not acknowledged');
    }
    // If more accumulated meanwhile and is already due, keep going.
    if (this.pending.samples.length + this.pending.deadLetters.length >= this.opts.batchRows) this.flushSoon(0);
  }

  private async commit(samples: Sample[], deadLetters: DeadLetter[], replay = false): Promise<void> {
    let lastErr: unknown;
    for (let attempt = 0; attempt < 2; attempt++) {
      const store = await this.lane();
      try {
        const r = await store.write(samples, deadLetters, replay ? { replay } : {});
        this.stats.committedSamples += r.inserted;
        this.stats.duplicateSamples += r.duplicates;
        this.stats.committedDeadLetters += r.deadLetters;
        this.stats.repeatedDeadLetters += r.deadLetterRepeats;
        if (r.staged) this.stats.stagedFlushes++;
        this.onCommit?.(r.inserted);
        return;
      } catch (err) {
        lastErr = err;
        // A transient error is handled by the spool and a row error by splitting; anything else
        // gets one more try (a deadlock between two connections, a serialization failure)
        // before it is treated as transient.
        if (isTransientDbError(err) || isPermanentRowError(err)) break;
      } finally {
        this.unlane(store);
      }
    }
    throw lastErr;
  }

  private lane(): Promise<SampleStore> {
    const s = this.free.shift();
    if (s) return Promise.resolve(s);
    return new Promise((resolve) => this.waiting.push(resolve));
  }

  private unlane(s: SampleStore): void {
    const next = this.waiting.shift();
    if (next) next(s);
    else this.free.push(s);
  }

  /**
   * Commits a batch; when it fails with a permanent row error (isPermanentRowError) it is cut in
   * halves, and so on, until the rows that fail stand alone: each of those is stored as a dead
   * letter with the database's reason, every other row is committed. One bad row in 50 000 costs
   * about 2·log2(50 000) ≈ 32 extra transactions. Parts are committed in order; when one fails
   * for any other reason the rest (this part and those after it) is thrown in a NotCommitted, so
   * what was committed is not spooled again.
   */
  private async commitSplitting(batch: Part, replay = false): Promise<void> {
    const todo: Part[] = [{ samples: batch.samples, deadLetters: batch.deadLetters }];
    while (todo.length) {
      const part = todo.pop()!;
      try {
        await this.commit(part.samples, part.deadLetters, replay);
      } catch (err) {
        if (!isPermanentRowError(err)) throw new NotCommitted(err, merge([part, ...todo.reverse()]));
        const n = part.samples.length + part.deadLetters.length;
        if (n === 1) {
          try {
            await this.refused(part, err);
          } catch (e) {
            throw new NotCommitted(e, merge([part, ...todo.reverse()]));
          }
          continue;
        }
        const [a, b] = halves(part);
        this.stats.splitCommits += 2;
        todo.push(b, a);
      }
    }
  }

  /**
   * One row the database refused: a sample becomes a dead letter carrying its values and the
   * database's reason; a dead letter is stored again as plain text (its own fields in the
   * payload). If even that is refused the row goes to `spool/rejected/`.
   */
  private async refused(part: Part, err: unknown): Promise<void> {
    const why = `${codeOf(err)}${(err as Error)?.message ?? String(err)}`;
    const s = part.samples[0];
    const d = part.deadLetters[0];
    // Numbers as text: NaN, ±Infinity and out-of-range values survive JSON that way.
    const payload = s ? JSON.stringify({ tagId: s.tagId, ts: String(s.ts), value: String(s.value), quality: s.quality }) : JSON.stringify(d);
    const plain: DeadLetter = {
      ts: Date.now(),
      sourceId: null,
      address: null,
      payload: pgText(payload, DEAD_LETTER_PAYLOAD_MAX),
      payloadBytes: Buffer.byteLength(payload),
      reason: pgText(s ? `sample refused by the database (${why})` : `dead letter refused by the database (${why}); its reason: ${d?.reason ?? ''}`, DEAD_LETTER_REASON_MAX),
      // The same sample (its primary key and value) or the same letter refused again — a
      // redelivery, a spool replay — is that row seen again.
      key: s ? deliveryKey('refused sample', s.tagId, String(s.ts), String(s.value), s.quality) : deliveryKey('refused letter', d?.key ?? payload),
    };
    if (s) this.stats.refusedSamples++;
    else this.stats.refusedDeadLetters++;
    this.opts.log.warn({ reason: plain.reason }, s ? 'sample refused by the database; stored as a dead letter' : 'dead letter refused by the database; stored in plain form');
    try {
      await this.commit([], [plain]);
    } catch (e) {
      if (!isPermanentRowError(e)) throw e;
      const file = await this.spool.quarantine({ samples: part.samples, deadLetters: [...part.deadLetters, plain] });
      this.stats.quarantinedRows++;
      this.opts.log.error({ err: e, file }, 'a refused row could not be stored as a dead letter either; kept in the quarantine');
    }
  }

  /**
   * Appends to the spool. While the spool is at its cap the batch is held here, not
   * acknowledged (the chain waits, the backlog stays high, sources pause), and the database is
   * tried again — spool replay first — until one of them takes it. On close it gives up
   * without acknowledging: the source keeps the messages.
   */
  private async toSpool(b: Part): Promise<void> {
    let rest = b;
    if (this.spool.capReached) {
      this.stats.spoolCapHolds++;
      this.opts.log.error({ bytes: this.spool.pendingBytes }, 'spool at its size cap; holding the batch unacknowledged');
    }
    while (this.spool.capReached) {
      this.updatePressure();
      if (this.closed) throw new Error('spool at its size cap and the database unreachable; batch not acknowledged');
      await new Promise((r) => setTimeout(r, Math.max(50, this.retryAt - this.now())));
      await this.replaySpool();
      if (this.spool.isEmpty) {
        try {
          await this.commitSplitting(rest);
          this.markUp();
          return;
        } catch (err) {
          this.markDown(causeOf(err));
          if (err instanceof NotCommitted) rest = err.rest;
        }
      }
    }
    await this.spool.append(rest);
    this.stats.spooledSamples += rest.samples.length;
    this.updatePressure();
  }

  private async replaySpool(): Promise<void> {
    const unreadableBefore = this.spool.status().unreadable.length;
    try {
      const before = this.stats.committedSamples;
      const n = await this.spool.replay(async (recs: SpoolRecord[]) => {
        // A replay may repeat what a killed run committed just before it could delete the file.
        await this.commitSplitting({ samples: recs.flatMap((r) => r.samples), deadLetters: recs.flatMap((r) => r.deadLetters) }, true);
      });
      this.stats.replayedSamples += this.stats.committedSamples - before;
      if (n) this.opts.log.info({ records: n }, 'spool replayed');
      this.markUp();
    } catch (err) {
      // Rows the database refuses were split off inside commitSplitting; what reaches here is the
      // database itself failing. The file stays and is tried again after the backoff.
      this.markDown(causeOf(err));
    }
    const unreadable = this.spool.status().unreadable;
    if (unreadable.length > unreadableBefore) {
      this.stats.lastError = `spool file unreadable: ${unreadable.at(-1)!.file}: ${unreadable.at(-1)!.error}`;
      this.opts.log.error({ unreadable }, 'spool file could not be read; kept, out of the replay until ingest restarts');
    }
  }

  private forgetting = false;

  /** Unreadable spool files an operator moved out of the spool folder leave the status (and their alarm clears). */
  private async forgetRemovedSpoolFiles(): Promise<void> {
    if (this.forgetting) return;
    this.forgetting = true;
    try {
      const gone = await this.spool.forgetRemoved();
      if (gone.length) this.opts.log.warn({ files: gone }, 'unreadable spool file moved away by an operator; no longer reported');
    } finally {
      this.forgetting = false;
    }
  }

  private markUp(): void {
    if (this.stats.dbState === 'down') this.opts.log.info('database reachable again');
    this.stats.dbState = 'up';
    this.backoffMs = 250;
    this.retryAt = 0;
  }

  private markDown(err: unknown): void {
    if (this.stats.dbState === 'up') this.opts.log.warn({ err: (err as Error).message }, 'database write failed; spooling');
    this.stats.dbState = 'down';
    this.stats.lastError = (err as Error).message;
    this.retryAt = this.now() + this.backoffMs;
    this.backoffMs = Math.min(this.backoffMs * 2, 5_000);
  }

  /** Writes everything pending (SIGTERM path) and stops the timer. */
  async close(): Promise<void> {
    this.closed = true;
    clearInterval(this.replayTimer);
    await this.flush();
    await this.spool.close();
  }

  get isClosed(): boolean {
    return this.closed;
  }
}

function merge(parts: readonly Part[]): Part {
  return { samples: parts.flatMap((p) => p.samples), deadLetters: parts.flatMap((p) => p.deadLetters) };
}

/** The part's rows (samples, then dead letters) cut into two halves. */
function halves(p: Part): [Part, Part] {
  const n = p.samples.length + p.deadLetters.length;
  const h = Math.floor(n / 2);
  if (h <= p.samples.length) {
    return [
      { samples: p.samples.slice(0, h), deadLetters: [] },
      { samples: p.samples.slice(h), deadLetters: p.deadLetters },
    ];
  }
  const k = h - p.samples.length;
  return [
    { samples: p.samples, deadLetters: p.deadLetters.slice(0, k) },
    { samples: [], deadLetters: p.deadLetters.slice(k) },
  ];
}
