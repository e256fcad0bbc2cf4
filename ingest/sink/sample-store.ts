import { pipeline } from 'node:stream/promises';
import { Readable } from 'node:stream';
import pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import { DEAD_LETTER_ADDRESS_MAX, DEAD_LETTER_REASON_MAX, pgText, pgTextOrNull } from '../pipeline/pg-text.ts';
import { DEAD_LETTER_PAYLOAD_MAX, type DeadLetter, type Sample } from '../pipeline/types.ts';
import { encodeSamplesBinary } from './copy-binary.ts';
import { aggregate, latestPerTag, mergeInto, type RollupRow } from './rollup.ts';

/** What one committed write did. */
export interface WriteResult {
  inserted: number;
  duplicates: number;
  /** Dead letters stored as new rows. */
  deadLetters: number;
  /** Arrivals of a dead letter already stored (same delivery key), counted on its row. */
  deadLetterRepeats: number;
  /** True when the fast path hit a duplicate key and the batch went through the staging table. */
  staged: boolean;
}

const DAY_MS = 86_400_000;

const byTagBucket = (a: RollupRow, b: RollupRow) => a.tagId - b.tagId || a.bucket - b.bucket;

/**
 * The batch in primary-key order (tag, ts). Rows arrive interleaved across tags; in key order the
 * primary-key index is filled in runs per tag, which measured about 10 % faster for 50 000-row
 * batches of 1 000 tags (sort included), keeps each tag's rows together in the heap, and makes two
 * writer connections that carry the same keys (a replay) take their index locks in the same order.
 */
export function byKey(batch: readonly Sample[]): readonly Sample[] {
  for (let i = 1; i < batch.length; i++) {
    const a = batch[i - 1]!;
    const b = batch[i]!;
    if (a.tagId > b.tagId || (a.tagId === b.tagId && a.ts > b.ts)) return groupedByKey(batch);
  }
  return batch;
}

/**
 * The same order as a stable sort by (tag, ts), built by grouping: rows are put in per-tag lists
 * in arrival order, the tags are sorted, and a list is sorted by time only if it is not in order
 * already (a tag's readings nearly always arrive in time order). For 50 000 rows interleaved over
 * 1 000 tags, as in the batched phase of tests/bench/ingest.bench.ts, this sorts 1 000 numbers
 * instead of comparing rows: 2.4 ms per batch against 6.0 ms for the comparison sort.
 * Array.prototype.sort is stable (ECMAScript 2019), so equal keys keep arrival order either way;
 * tests/unit/ingest/sample-order.test.ts compares both.
 */
function groupedByKey(batch: readonly Sample[]): Sample[] {
  const groups = new Map<number, Sample[]>();
  for (const s of batch) {
    const g = groups.get(s.tagId);
    if (g) g.push(s);
    else groups.set(s.tagId, [s]);
  }
  const tags = [...groups.keys()].sort((a, b) => a - b);
  const out: Sample[] = new Array(batch.length);
  let o = 0;
  for (const t of tags) {
    const g = groups.get(t)!;
    for (let i = 1; i < g.length; i++) {
      if (g[i - 1]!.ts > g[i]!.ts) {
        g.sort((x, y) => x.ts - y.ts);
        break;
      }
    }
    for (const s of g) out[o++] = s;
  }
  return out;
}

/**
 * Error classes after which the connection is gone or the server is not accepting work, so the
 * batch goes to the spool and is retried; anything else is a defect in the batch or the schema.
 * SQLSTATE classes from PostgreSQL's Appendix A: 08 connection exception, 57P0x operator
 * intervention (admin shutdown, crash shutdown, cannot connect now), 53 insufficient resources.
 */
export function isTransientDbError(err: unknown): boolean {
  const e = err as { code?: string; message?: string };
  const code = e?.code ?? '';
  if (/^(08|53|57P0)/.test(code)) return true;
  if (['ECONNREFUSED', 'ECONNRESET', 'EPIPE', 'ETIMEDOUT', 'ENOTFOUND', 'EHOSTUNREACH', 'ENOENT'].includes(code)) return true;
  return /Connection terminated|not queryable|Client has encountered a connection error|connection is closed|timeout exceeded/i.test(e?.message ?? '');
}

/**
 * Errors caused by the rows of a batch rather than by the database or the connection: the same
 * rows fail again however often they are retried, so the batch is split until only the rows
 * that fail remain (BatchWriter). SQLSTATE classes from PostgreSQL's Appendix A: 22 data
 * exception (a timestamp out of range, NUL or a bad byte sequence in text, a number out of
 * range), 23 integrity constraint violation (a foreign key to a deleted tag, a check; a
 * duplicate key in `samples` never gets here, write() takes the staging path); and the
 * RangeError Node's Buffer throws when a row's number does not fit the binary COPY field
 * (ERR_OUT_OF_RANGE, e.g. a quality above 32 767). Everything else — a lost connection, a
 * shutdown, a serialization failure (40001), a deadlock (40P01), a missing table — is retried
 * as a whole (once at once, then from the spool with backoff) and never splits a batch, so a
 * database fault cannot turn good samples into dead letters.
 */
export function isPermanentRowError(err: unknown): boolean {
  const e = err as { code?: unknown };
  if (err instanceof RangeError && e.code === 'ERR_OUT_OF_RANGE') return true;
  return typeof e?.code === 'string' && /^(22|23)[0-9A-Z]{3}$/.test(e.code);
}

/**
 * A PostgreSQL array literal of numbers (PostgreSQL documentation, "Arrays", 8.15.6), written
 * here rather than by node-postgres, which formats each element through its generic value
 * preparation: for the few thousand rollup and latest-value rows per batch that was about 7 % of
 * ingest's CPU in the single-value phase of tests/bench/ingest.bench.ts. Timestamps go as epoch milliseconds and become timestamptz in SQL
 * (to_timestamp(ms / 1000) keeps microsecond precision), which saves a Date and its text form
 * per element. JavaScript's number text (ECMA-262 Number::toString: "1e+21", "NaN",
 * "Infinity") is valid float8 input.
 */
export function pgNumberArray(values: readonly (number | null)[]): string {
  let out = '{';
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (i) out += ',';
    out += v === null || v === undefined ? 'NULL' : String(v);
  }
  return out + '}';
}

function rollupSql(table: 'rollup_1m' | 'rollup_1h'): string {
  return `INSERT INTO ${table} AS r (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
    SELECT u.tag_id, to_timestamp(u.bucket / 1000), u.min, u.max, u.sum, u.count, u.last, to_timestamp(u.last_ts / 1000), u.quality
    FROM unnest($1::int[], $2::float8[], $3::float8[], $4::float8[], $5::float8[], $6::bigint[], $7::float8[], $8::float8[], $9::int2[])
      AS u(tag_id, bucket, min, max, sum, count, last, last_ts, quality)
    ON CONFLICT (tag_id, bucket) DO UPDATE SET
      min = least(r.min, excluded.min),
      max = greatest(r.max, excluded.max),
      sum = r.sum + excluded.sum,
      count = r.count + excluded.count,
      last = CASE WHEN excluded.last_ts >= r.last_ts THEN excluded.last ELSE r.last END,
      last_ts = greatest(r.last_ts, excluded.last_ts),
      quality = ((r.quality | excluded.quality) & ~3) | greatest(r.quality & 3, excluded.quality & 3)`;
}

function rollupParams(rows: RollupRow[]): string[] {
  return [
    pgNumberArray(rows.map((r) => r.tagId)),
    pgNumberArray(rows.map((r) => r.bucket)),
    pgNumberArray(rows.map((r) => r.min)),
    pgNumberArray(rows.map((r) => r.max)),
    pgNumberArray(rows.map((r) => r.sum)),
    pgNumberArray(rows.map((r) => r.count)),
    pgNumberArray(rows.map((r) => r.last)),
    pgNumberArray(rows.map((r) => r.lastTs)),
    pgNumberArray(rows.map((r) => r.quality)),
  ];
}

/**
 * The database side of the batch writer: one connection of its own (the staging table is a
 * temporary table of that session), one transaction per batch.
 *
 * Write path, chosen by measurement (see tests/bench/ingest.bench.ts and STACK.md): binary COPY
 * straight into `samples` inside the transaction. A replay (spool, broker redelivery) can carry
 * rows that are already stored; the primary key (tag_id, ts) then fails the COPY, the
 * transaction is rolled back and the batch is retried through a session temp table:
 * COPY into it, then `INSERT INTO samples SELECT … ON CONFLICT (tag_id, ts) DO NOTHING RETURNING`.
 * Either way rollups and tag_latest are computed from exactly the rows that were inserted, so a
 * replay never counts a sample twice. Duplicates are rare, so the common path pays nothing.
 */
export class SampleStore {
  private client: pg.Client | null = null;
  private knownDays = new Set<number>();

  constructor(
    private url: string,
    private opts: { retentionDays: number },
  ) {}

  private async connect(): Promise<pg.Client> {
    if (this.client) return this.client;
    const c = new pg.Client({ connectionString: this.url, connectionTimeoutMillis: 5_000, application_name: 'flocstream-ingest' });
    c.on('error', () => {
      if (this.client === c) this.client = null;
    });
    try {
      await c.connect();
      await c.query(`CREATE TEMP TABLE IF NOT EXISTS ingest_stage (tag_id int NOT NULL, ts timestamptz NOT NULL, value float8, quality int2 NOT NULL) ON COMMIT DELETE ROWS`);
    } catch (err) {
      c.end().catch(() => {});
      throw err;
    }
    this.client = c;
    return c;
  }

  /** Drops the connection after an error so the next write starts clean. */
  reset(): void {
    const c = this.client;
    this.client = null;
    c?.end().catch(() => {});
  }

  async close(): Promise<void> {
    const c = this.client;
    this.client = null;
    await c?.end().catch(() => {});
  }

  /**
   * Creates the day partitions a batch needs (within retention and up to a week ahead; anything
   * else lands in the DEFAULT partition, see drizzle/0001_samples_partitioned.sql).
   */
  private async ensurePartitions(c: pg.Client, samples: readonly Sample[]): Promise<void> {
    const now = Date.now();
    const lo = Math.floor((now - this.opts.retentionDays * DAY_MS) / DAY_MS);
    const hi = Math.floor(now / DAY_MS) + 7;
    let missing: Set<number> | null = null;
    let prev = NaN;
    for (const s of samples) {
      const d = Math.floor(s.ts / DAY_MS);
      if (d === prev) continue;
      prev = d;
      if (!this.knownDays.has(d) && d >= lo && d <= hi) (missing ??= new Set()).add(d);
    }
    if (!missing) return;
    for (const d of missing) {
      await c.query('SELECT flocstream_ensure_day_partition($1)', [new Date(d * DAY_MS)]);
      this.knownDays.add(d);
    }
  }

  /** Partition upkeep: the next days ahead, and drop the ones past retention. Returns how many were dropped. */
  async maintainPartitions(now = Date.now()): Promise<number> {
    const c = await this.connect();
    for (let k = 0; k <= 2; k++) await c.query('SELECT flocstream_ensure_day_partition($1)', [new Date(now + k * DAY_MS)]);
    const r = await c.query<{ n: number }>('SELECT flocstream_drop_partitions_before($1) AS n', [new Date(now - this.opts.retentionDays * DAY_MS)]);
    return r.rows[0]?.n ?? 0;
  }

  /**
   * One batch in one transaction. `replay`: the batch comes from the spool, and may have been
   * committed already by a run that was killed before it could delete the spool file; its
   * samples are absorbed by the primary key, and its dead letters by their delivery key without
   * being counted again (writeDeadLetters).
   */
  async write(batch: readonly Sample[], deadLetters: readonly DeadLetter[], opts: { replay?: boolean } = {}): Promise<WriteResult> {
    const samples = byKey(batch);
    const c = await this.connect();
    try {
      if (samples.length) await this.ensurePartitions(c, samples);
      await c.query('BEGIN');
      let inserted: readonly Sample[] = samples;
      let staged = false;
      if (samples.length) {
        try {
          await this.copy(c, 'samples', samples);
        } catch (err) {
          if ((err as { code?: string }).code !== '23505') throw err;
          await c.query('ROLLBACK');
          await c.query('BEGIN');
          staged = true;
          inserted = await this.stagedInsert(c, samples);
        }
      }
      if (inserted.length) {
        // Hours are merged from the minute rows (a few thousand) rather than from the samples again.
        // Rows go in sorted by (tag, bucket): with several writer connections every transaction
        // then locks the rows it shares with another in the same order, so two batches wait for
        // each other instead of deadlocking (PostgreSQL documentation, "Deadlocks").
        const perMinute = aggregate(inserted, 60_000).sort(byTagBucket);
        const perHour = mergeInto(perMinute, 3_600_000).sort(byTagBucket);
        for (const [table, rows] of [['rollup_1m', perMinute], ['rollup_1h', perHour]] as const) {
          if (rows.length) await c.query({ name: `ingest_${table}`, text: rollupSql(table), values: rollupParams(rows) });
        }
        const latest = latestPerTag(inserted).sort((a, b) => a.tagId - b.tagId);
        await c.query({
          name: 'ingest_tag_latest',
          // Only tags that still exist: tag_latest references tags, a deleted tag must not fail the batch.
          text: `INSERT INTO tag_latest AS l (tag_id, ts, value, quality, received_at)
            SELECT u.tag_id, to_timestamp(u.ts / 1000), u.value, u.quality, now()
            FROM unnest($1::int[], $2::float8[], $3::float8[], $4::int2[]) AS u(tag_id, ts, value, quality)
            WHERE EXISTS (SELECT 1 FROM tags t WHERE t.id = u.tag_id)
            ON CONFLICT (tag_id) DO UPDATE SET ts = excluded.ts, value = excluded.value, quality = excluded.quality, received_at = excluded.received_at
            WHERE excluded.ts >= l.ts`,
          values: [latest.map((s) => s.tagId), latest.map((s) => s.ts), latest.map((s) => s.value), latest.map((s) => s.quality)].map(pgNumberArray),
        });
      }
      const letters = deadLetters.length ? await this.writeDeadLetters(c, deadLetters, opts.replay === true) : { fresh: 0, repeats: 0 };
      await c.query('COMMIT');
      return { inserted: inserted.length, duplicates: samples.length - inserted.length, deadLetters: letters.fresh, deadLetterRepeats: letters.repeats, staged };
    } catch (err) {
      // Whatever failed, the transaction is not committed; a fresh connection avoids half states.
      this.reset();
      throw err;
    }
  }

  /**
   * Dead letters by delivery key (DeadLetter.key): a letter whose key is stored already is one
   * more arrival of it — `times_seen` counts up and `last_seen_at` moves on — not a second row.
   * Letters of one key within the batch are merged first (ON CONFLICT DO UPDATE cannot touch a
   * row twice in one statement, SQLSTATE 21000; PostgreSQL documentation, "INSERT", ON CONFLICT
   * clause) and go in key order, so two writer connections that share keys take the index locks
   * in the same order (PostgreSQL documentation, "Deadlocks").
   *
   * `replay`: the batch may have been committed by a run killed before it deleted its spool
   * file. An arrival already counted has the stored row's first or latest receive time
   * (millisecond receive times, unique per arrival of a key in practice), so it is not counted
   * again.
   */
  private async writeDeadLetters(c: pg.Client, deadLetters: readonly DeadLetter[], replay: boolean): Promise<{ fresh: number; repeats: number }> {
    const groups = new Map<string, { d: DeadLetter; n: number; last: number }>();
    for (const d of deadLetters) {
      const g = groups.get(d.key);
      if (!g) groups.set(d.key, { d, n: 1, last: d.ts });
      else {
        g.n++;
        if (d.ts < g.d.ts) g.d = d;
        g.last = Math.max(g.last, d.ts);
      }
    }
    const rows = [...groups.values()].sort((a, b) => (a.d.key < b.d.key ? -1 : a.d.key > b.d.key ? 1 : 0));
    const r = await c.query<{ delivery_key: string; times_seen: number }>({
      name: replay ? 'ingest_dead_letters_replay' : 'ingest_dead_letters',
      text: `INSERT INTO dead_letters AS d (ts, last_seen_at, times_seen, source_id, address, payload, payload_bytes, reason, delivery_key)
        SELECT * FROM unnest($1::timestamptz[], $2::timestamptz[], $3::int[], $4::int[], $5::text[], $6::text[], $7::int[], $8::text[], $9::text[]) ORDER BY 9
        ON CONFLICT (delivery_key) DO UPDATE SET times_seen = d.times_seen + excluded.times_seen, last_seen_at = greatest(coalesce(d.last_seen_at, d.ts), excluded.last_seen_at)
        ${replay ? 'WHERE excluded.ts <> d.ts AND excluded.last_seen_at IS DISTINCT FROM d.last_seen_at' : ''}
        RETURNING delivery_key, times_seen`,
      // deadLetter() already cleans its text; this is the last line before PostgreSQL, for
      // dead letters made anywhere else (a spool written by an older version, the writer's own).
      values: [
        rows.map((g) => new Date(g.d.ts)),
        rows.map((g) => new Date(g.last)),
        rows.map((g) => g.n),
        rows.map((g) => g.d.sourceId),
        rows.map((g) => pgTextOrNull(g.d.address, DEAD_LETTER_ADDRESS_MAX)),
        rows.map((g) => pgText(g.d.payload, DEAD_LETTER_PAYLOAD_MAX)),
        rows.map((g) => g.d.payloadBytes),
        rows.map((g) => pgText(g.d.reason, DEAD_LETTER_REASON_MAX)),
        rows.map((g) => g.d.key),
      ],
    });
    let fresh = 0;
    let repeats = 0;
    for (const x of r.rows) {
      const n = groups.get(x.delivery_key)?.n ?? 0;
      // A new row holds exactly this batch's arrivals; an existing one had at least one before.
      if (x.times_seen === n) {
        fresh++;
        repeats += n - 1;
      } else repeats += n;
    }
    return { fresh, repeats };
  }

  private async copy(c: pg.Client, table: string, samples: readonly Sample[]): Promise<void> {
    const stream = c.query(copyFrom(`COPY ${table} (tag_id, ts, value, quality) FROM STDIN (FORMAT binary)`));
    await pipeline(Readable.from([encodeSamplesBinary(samples)]), stream);
  }

  private async stagedInsert(c: pg.Client, samples: readonly Sample[]): Promise<Sample[]> {
    await this.copy(c, 'ingest_stage', samples);
    const r = await c.query<{ tag_id: number; ms: number; value: number | null; quality: number }>(
      `INSERT INTO samples (tag_id, ts, value, quality) SELECT tag_id, ts, value, quality FROM ingest_stage
       ON CONFLICT (tag_id, ts) DO NOTHING
       RETURNING tag_id, (extract(epoch FROM ts) * 1000)::float8 AS ms, value, quality`,
    );
    return r.rows.map((x) => ({ tagId: x.tag_id, ts: x.ms, value: x.value, quality: x.quality }));
  }
}
