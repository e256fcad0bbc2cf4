import type { Readable, Writable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import type pg from 'pg';
import { from as copyFrom, to as copyTo } from 'pg-copy-streams';
import type { Balance } from '../../shared/contracts/balance.ts';
import type { HistoryRowError } from '../../shared/contracts/history.ts';
import type { SeriesPoint } from '../../shared/domain/balance/inputs.ts';
import type { Sample } from '../../ingest/pipeline/types.ts';
import { encodeSamplesBinary } from '../../ingest/sink/copy-binary.ts';
import type { Database } from '../db/client.ts';
import type { ImportTag } from '../jobs/history-rows.ts';

export interface HistoryJobRow {
  id: number;
  plantId: number;
  kind: 'import' | 'recompute';
  state: 'queued' | 'running' | 'done' | 'failed';
  progress: number;
  rows: number;
  rejected: number;
  errors: HistoryRowError[];
  options: Record<string, unknown>;
  result: Record<string, unknown>;
  parentId: number | null;
  /** The user who uploaded the file (null for a recompute, which follows its parent import). */
  createdBy: number | null;
  startedAt: Date | null;
  finishedAt: Date | null;
}

/** Per-tag window of an import [first, last] sample time (epoch ms). */
export interface TagWindow {
  tagId: number;
  from_ms: number;
  to_ms: number;
}

/** One minute bucket of a tag as the recompute reads it: mean for the series, last for the reading. */
export interface MinuteRow extends SeriesPoint {
  tagId: number;
  last: number;
  lastTs_ms: number;
}

const HOUR_MS = 3_600_000;
/** Origin of date_bin's buckets: a UTC midnight, so minutes, hours and days are UTC ones. */
const BIN_ORIGIN = `timestamptz '2000-01-01 00:00:00+00'`;
/** The SQL path's move into `samples` goes in about this many statements (progress between them)… */
const MOVE_STEPS = 20;
/** …of at least this many pages of the staging table (8 KiB each, about 150 rows). */
const MOVE_MIN_PAGES = 64;

function jobRow(x: Record<string, unknown>): HistoryJobRow {
  return {
    id: x.id as number,
    plantId: x.plant_id as number,
    kind: x.kind as HistoryJobRow['kind'],
    state: x.state as HistoryJobRow['state'],
    progress: x.progress as number,
    rows: Number(x.rows),
    rejected: Number(x.rejected),
    errors: x.errors as HistoryRowError[],
    options: x.options as Record<string, unknown>,
    result: x.result as Record<string, unknown>,
    parentId: (x.parent_id as number | null) ?? null,
    createdBy: (x.created_by as number | null) ?? null,
    startedAt: (x.started_at as Date | null) ?? null,
    finishedAt: (x.finished_at as Date | null) ?? null,
  };
}

/** Hour-aligned windows per tag (the rollups are rebuilt over whole hours). */
function hourWindows(w: readonly TagWindow[]) {
  return [w.map((x) => x.tagId), w.map((x) => new Date(Math.floor(x.from_ms / HOUR_MS) * HOUR_MS)), w.map((x) => new Date(Math.floor(x.to_ms / HOUR_MS) * HOUR_MS + HOUR_MS))];
}

const ROLLUP_SET = `min = excluded.min, max = excluded.max, sum = excluded.sum, count = excluded.count, last = excluded.last, last_ts = excluded.last_ts, quality = excluded.quality`;

type Conn = pg.PoolClient;

export interface SqlImportInput {
  /** COPY text rows (tag_id, ts, value, quality) of the checked lines, from LineScanner (server/jobs/history-scan.ts). */
  source: Readable;
  dryRun: boolean;
  /** Called once COPY has every row, with the rows it took: throws SqlPathRefused to refuse the file. */
  copied: (rows: number) => void | Promise<void>;
  /** The share (0–1) of the work after the COPY that is done, reported between its statements. */
  progress: (share: number) => Promise<void>;
}

export interface SqlImportResult {
  rows: number;
  /** Rows inserted into samples (null for a dry run). */
  inserted: number | null;
  windows: TagWindow[];
  timing: { copySec: number; minutesSec: number; insertSec: number; rollupSec: number; moveSteps: number; conflicts: 'none' | 'overlap' | 'duplicate' };
}

/**
 * The SQL path refused the file: a line its strict forms do not cover, or a value PostgreSQL
 * would read differently from the line checks. Nothing was stored; the caller runs the
 * csv-parse path, which stores the file or lists its errors.
 */
export class SqlPathRefused extends Error {}

/** SQLSTATE classes 22 (data exception) and 23 (integrity constraint): the file's content, not the database. */
function isDataError(err: unknown): boolean {
  const code = (err as { code?: unknown }).code;
  return typeof code === 'string' && (code.startsWith('22') || code.startsWith('23'));
}

/**
 * The minute rollups of each tag's window rebuilt from `samples` over whole hours, then the hour
 * rollups and tag_latest (finishRollups); inside the caller's transaction. A sample without a
 * value or graded bad is left out, as ingest does (ingest/sink/rollup.ts). Buckets are date_bin's
 * UTC minutes and hours (plain arithmetic on the timestamp, where date_trunc converts each one to
 * the session's zone), and a bucket's `last` is read back by its newest time through the primary
 * key: one lookup per bucket instead of an array built per sample (0.9 s against 1.7 s for a
 * million samples, measured with the bench's data).
 */
async function rebuildRollups(c: Conn, windows: readonly TagWindow[], progress: (share: number) => Promise<void> = async () => {}): Promise<void> {
  const w = hourWindows(windows);
  await c.query(
    `WITH a AS (
       SELECT s.tag_id, date_bin('1 minute', s.ts, ${BIN_ORIGIN}) AS bucket, min(s.value) AS min, max(s.value) AS max, sum(s.value) AS sum, count(*) AS count,
              max(s.ts) AS last_ts, ((bit_or(s.quality) & ~3) | max(s.quality & 3))::int2 AS quality
         FROM unnest($1::int[], $2::timestamptz[], $3::timestamptz[]) AS w(tag_id, lo, hi)
         JOIN samples s ON s.tag_id = w.tag_id AND s.ts >= w.lo AND s.ts < w.hi
        WHERE s.value IS NOT NULL AND (s.quality & 3) < 2
        GROUP BY 1, 2)
     INSERT INTO rollup_1m AS r (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
     SELECT a.tag_id, a.bucket, a.min, a.max, a.sum, a.count, s.value, a.last_ts, a.quality
       FROM a JOIN samples s ON s.tag_id = a.tag_id AND s.ts = a.last_ts
     ON CONFLICT (tag_id, bucket) DO UPDATE SET ${ROLLUP_SET}`,
    w,
  );
  await progress(0.6);
  await finishRollups(c, windows, progress);
}

/** What a minute rollup takes of a sample: a value, not graded bad (as ingest/sink/rollup.ts). */
const ROLLUP_ROW = `value IS NOT NULL AND (quality & 3) < 2`;

/**
 * The staged file's minute buckets per tag (temporary `history_minutes`, one pass over the
 * staging table): the rollup figures of the samples a rollup takes, and each bucket's first and
 * last time of any sample, which give the tags' windows and the UTC days of the file.
 */
async function stageMinutes(c: Conn): Promise<void> {
  await c.query(
    `CREATE TEMP TABLE history_minutes AS
     SELECT tag_id, date_bin('1 minute', ts, ${BIN_ORIGIN}) AS bucket, min(ts) AS first_ts, max(ts) AS last_any,
            min(value) FILTER (WHERE ${ROLLUP_ROW}) AS min, max(value) FILTER (WHERE ${ROLLUP_ROW}) AS max,
            sum(value) FILTER (WHERE ${ROLLUP_ROW}) AS sum, count(*) FILTER (WHERE ${ROLLUP_ROW}) AS count,
            max(ts) FILTER (WHERE ${ROLLUP_ROW}) AS last_ts,
            ((bit_or(quality) FILTER (WHERE ${ROLLUP_ROW}) & ~3) | max(quality & 3) FILTER (WHERE ${ROLLUP_ROW}))::int2 AS quality
       FROM history_rows GROUP BY 1, 2`,
  );
  await c.query('ANALYZE history_minutes');
}

/**
 * Rows of `select` on connection `from` into `into` on connection `to` by a binary COPY out and
 * in (PostgreSQL's COPY FROM inserts in batches, one WAL record per page, where INSERT … SELECT
 * writes one per row: in the bench, the COPY of the staged rows into `samples` took about 0.6 of
 * the time of INSERT … SELECT, both measured in the same run). When the COPY in fails (a key
 * already there), the COPY out is read to its end, so `from` stays usable. Returns the rows copied in.
 */
async function pipeCopy(from: Conn, select: string, to: Conn, into: string): Promise<number> {
  const out: Readable = from.query(copyTo(`COPY (${select}) TO STDOUT (FORMAT binary)`));
  const inn = to.query(copyFrom(`COPY ${into} FROM STDIN (FORMAT binary)`));
  const outEnded = new Promise<void>((resolve, reject) => {
    out.once('end', resolve);
    out.once('error', reject);
  });
  try {
    await new Promise<void>((resolve, reject) => {
      inn.once('finish', resolve);
      inn.once('error', reject);
      // The staging side failed: end the COPY in with its error (CopyFail), so `to` is usable too.
      out.once('error', (err) => {
        inn.destroy(err);
        reject(err);
      });
      out.pipe(inn);
    });
    await outEnded;
    return inn.rowCount;
  } catch (err) {
    // A late write to the failed COPY in must not surface as an unhandled error.
    inn.on('error', () => {});
    out.unpipe(inn);
    out.resume();
    await outEnded.catch(() => {});
    throw err;
  }
}

/**
 * The minute rollups of a file whose tags had no sample in their windows' hours before the
 * insert: then every sample of those hours is one of the file's, and its minute buckets
 * (stageMinutes, on the staging connection `stage`) are the rollups, with no second pass over
 * `samples`; `last` is the staged value at the bucket's newest time. They go to the move's
 * connection `c` by COPY and into rollup_1m there; then the hour rollups and tag_latest (finishRollups).
 */
async function rollupsFromStage(stage: Conn, c: Conn, windows: readonly TagWindow[], progress: (share: number) => Promise<void>): Promise<void> {
  await c.query(
    `CREATE TEMP TABLE history_minutes_in (tag_id integer, bucket timestamptz, min double precision, max double precision, sum double precision, count bigint, last double precision, last_ts timestamptz, quality smallint) ON COMMIT DROP`,
  );
  await pipeCopy(
    stage,
    `SELECT m.tag_id, m.bucket, m.min, m.max, m.sum, m.count, s.value, m.last_ts, m.quality
       FROM history_minutes m JOIN history_rows s ON s.tag_id = m.tag_id AND s.ts = m.last_ts
      WHERE m.count > 0`,
    c,
    'history_minutes_in (tag_id, bucket, min, max, sum, count, last, last_ts, quality)',
  );
  await progress(0.4);
  await c.query(
    `INSERT INTO rollup_1m AS r (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
     SELECT tag_id, bucket, min, max, sum, count, last, last_ts, quality FROM history_minutes_in
     ON CONFLICT (tag_id, bucket) DO UPDATE SET ${ROLLUP_SET}`,
  );
  await progress(0.6);
  await finishRollups(c, windows, progress);
}

/** The hour rollups of the windows from their minute rollups, and tag_latest where the window holds a newer sample. */
async function finishRollups(c: Conn, windows: readonly TagWindow[], progress: (share: number) => Promise<void>): Promise<void> {
  const w = hourWindows(windows);
  // last: the value of the newest minute, as max over (epoch, value) pairs (arrays compare element by element).
  await c.query(
    `INSERT INTO rollup_1h AS r (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
     SELECT m.tag_id, date_bin('1 hour', m.bucket, ${BIN_ORIGIN}), min(m.min), max(m.max), sum(m.sum), sum(m.count),
            (max(ARRAY[extract(epoch FROM m.last_ts)::float8, m.last]))[2], max(m.last_ts),
            ((bit_or(m.quality) & ~3) | max(m.quality & 3))::int2
       FROM unnest($1::int[], $2::timestamptz[], $3::timestamptz[]) AS w(tag_id, lo, hi)
       JOIN rollup_1m m ON m.tag_id = w.tag_id AND m.bucket >= w.lo AND m.bucket < w.hi
      GROUP BY 1, 2
     ON CONFLICT (tag_id, bucket) DO UPDATE SET ${ROLLUP_SET}`,
    w,
  );
  await progress(0.9);
  await c.query(
    `INSERT INTO tag_latest AS l (tag_id, ts, value, quality, received_at)
     SELECT s.tag_id, s.ts, s.value, s.quality, now()
       FROM unnest($1::int[], $2::timestamptz[]) AS w(tag_id, ts) JOIN samples s ON s.tag_id = w.tag_id AND s.ts = w.ts
     ON CONFLICT (tag_id) DO UPDATE SET ts = excluded.ts, value = excluded.value, quality = excluded.quality, received_at = excluded.received_at
     WHERE excluded.ts > l.ts`,
    [windows.map((x) => x.tagId), windows.map((x) => new Date(x.to_ms))],
  );
}

/**
 * Everything the historian import and the balance recompute read and write: the job rows, the
 * per-job staging partition (binary COPY), the all-or-nothing move into `samples` with the
 * rollups and tag_latest of the window, and the history the recompute reads "as of" a time.
 */
export function historyRepository(database: Database) {
  const { pool } = database;
  return {
    async createJob(j: { plantId: number; kind: 'import' | 'recompute'; options: Record<string, unknown>; parentId?: number | null; createdBy: number | null }): Promise<number> {
      const r = await pool.query<{ id: number }>(`INSERT INTO history_jobs (plant_id, kind, options, parent_id, created_by) VALUES ($1, $2, $3, $4, $5) RETURNING id`, [
        j.plantId,
        j.kind,
        JSON.stringify(j.options),
        j.parentId ?? null,
        j.createdBy,
      ]);
      return r.rows[0]!.id;
    },
    async job(id: number): Promise<HistoryJobRow | null> {
      const r = await pool.query(`SELECT * FROM history_jobs WHERE id = $1`, [id]);
      return r.rows[0] ? jobRow(r.rows[0]) : null;
    },
    async setOptions(id: number, options: Record<string, unknown>): Promise<void> {
      await pool.query(`UPDATE history_jobs SET options = options || $2::jsonb WHERE id = $1`, [id, JSON.stringify(options)]);
    },
    /**
     * Marks a queued row running for the BullMQ job `token`; false when another job holds or
     * finished it. The same token may take a running row again (BullMQ redelivers a job whose
     * worker died to another worker under its own id).
     */
    async claim(id: number, token: string): Promise<boolean> {
      const r = await pool.query(
        `UPDATE history_jobs SET state = 'running', started_at = now(), run_token = $2 WHERE id = $1 AND (state = 'queued' OR (state = 'running' AND run_token = $2))`,
        [id, token],
      );
      return r.rowCount === 1;
    },
    async progress(id: number, p: { progress: number; rows: number; rejected: number }): Promise<void> {
      await pool.query(`UPDATE history_jobs SET progress = $2, rows = $3, rejected = $4 WHERE id = $1`, [id, p.progress, p.rows, p.rejected]);
    },
    async finish(id: number, f: { state: 'done' | 'failed'; rows: number; rejected: number; errors: HistoryRowError[]; result: Record<string, unknown> }): Promise<void> {
      await pool.query(`UPDATE history_jobs SET state = $2, progress = CASE WHEN $2 = 'done' THEN 1 ELSE progress END, rows = $3, rejected = $4, errors = $5, result = result || $6::jsonb, finished_at = now() WHERE id = $1`, [
        id,
        f.state,
        f.rows,
        f.rejected,
        JSON.stringify(f.errors),
        JSON.stringify(f.result),
      ]);
    },
    /** Back to queued (a recompute stopped by a shutdown, resumed at the next start). */
    async requeue(id: number): Promise<void> {
      await pool.query(`UPDATE history_jobs SET state = 'queued' WHERE id = $1`, [id]);
    },
    /** Recomputes not finished (stopped by a shutdown, or queued when the process ended). */
    async unfinishedRecomputes(): Promise<number[]> {
      const r = await pool.query(`SELECT id FROM history_jobs WHERE kind = 'recompute' AND state IN ('queued', 'running') ORDER BY id`);
      return r.rows.map((x) => x.id as number);
    },
    async setResult(id: number, result: Record<string, unknown>): Promise<void> {
      await pool.query(`UPDATE history_jobs SET result = result || $2::jsonb WHERE id = $1`, [id, JSON.stringify(result)]);
    },
    /** Enabled and disabled tags of a plant by name (a historian may hold a tag no longer read live). */
    async importTags(plantId: number): Promise<ImportTag[]> {
      const r = await pool.query(`SELECT id, name, unit, range_low, range_high FROM tags WHERE plant_id = $1`, [plantId]);
      return r.rows.map((x) => ({ id: x.id, name: x.name, unit: x.unit, rangeLow: x.range_low, rangeHigh: x.range_high }));
    },

    /**
     * Opens the job's staging partition (UNLOGGED, job id as its column default, see
     * drizzle/0011_history_stage.sql) and one binary COPY into it on a connection of its own.
     * `write` resolves when the COPY stream takes more (backpressure), `end` when PostgreSQL
     * has every row; `abort` drops the partition.
     */
    async openStage(jobId: number) {
      const table = `history_stage_${jobId}`;
      const c = await pool.connect();
      // The COPY lasts as long as the file takes to read: the API pool's statement_timeout
      // (bounding requests) does not apply to a background job; RESET before the connection goes back.
      await c.query('SET statement_timeout = 0');
      // Created by a function with the owner's rights: the API role may not create tables (drizzle/0011).
      await c.query('SELECT flocstream_open_history_stage($1)', [jobId]);
      let closed = false;
      const copy: Writable = c.query(copyFrom(`COPY ${table} (tag_id, ts, value, quality) FROM STDIN (FORMAT binary)`));
      const done = new Promise<void>((resolve, reject) => {
        copy.once('finish', resolve);
        copy.once('error', reject);
      });
      // An aborted COPY rejects `done` with the connection's end; only `end` waits for it.
      done.catch(() => {});
      // The 19-byte header (signature, flags, extension length) once; every chunk after it is tuples only.
      const header = encodeSamplesBinary([]).subarray(0, 19);
      copy.write(header);
      return {
        async write(samples: readonly Sample[]): Promise<void> {
          if (!samples.length) return;
          const b = encodeSamplesBinary(samples);
          if (!copy.write(b.subarray(19, b.length - 2))) await new Promise<void>((r) => copy.once('drain', r));
        },
        async end(): Promise<void> {
          const trailer = Buffer.alloc(2);
          trailer.writeInt16BE(-1, 0);
          copy.end(trailer);
          closed = true;
          try {
            await done;
            await c.query('RESET statement_timeout');
            c.release();
          } catch (err) {
            c.release(true);
            throw err;
          }
        },
        async abort(): Promise<void> {
          if (closed) return;
          closed = true;
          copy.destroy();
          // The connection is mid-COPY: end it rather than hand it back to the pool.
          c.release(true);
        },
      };
    },
    async dropStage(jobId: number): Promise<void> {
      await pool.query('SELECT flocstream_drop_history_stage($1)', [jobId]);
    },

    /**
     * The move, one transaction: day partitions for every day of the file
     * (flocstream_ensure_day_partition), the staged rows into `samples` with ON CONFLICT DO
     * NOTHING (a file stored before adds nothing), the minute rollups rebuilt from `samples` over
     * the whole hours of each tag's window and the hour rollups from those minutes, and
     * tag_latest where the file holds a newer sample. Returns the rows inserted.
     */
    async move(jobId: number, days: readonly number[], windows: readonly TagWindow[]): Promise<{ inserted: number; insertSec: number; rollupSec: number }> {
      const c = await pool.connect();
      const sec = (t: number) => Math.round((performance.now() - t) / 100) / 10;
      try {
        await c.query('BEGIN');
        // A background job: the API pool's statement_timeout bounds requests, not a move of millions of rows.
        await c.query('SET LOCAL statement_timeout = 0');
        // Minute and hour buckets are UTC (date_trunc follows the session's zone).
        await c.query(`SET LOCAL timezone = 'UTC'`);
        for (const d of [...days].sort((a, b) => a - b)) await c.query('SELECT flocstream_ensure_day_partition($1)', [new Date(d * 86_400_000)]);
        let t = performance.now();
        const ins = await c.query(`INSERT INTO samples (tag_id, ts, value, quality) SELECT tag_id, ts, value, quality FROM history_stage_${jobId} ON CONFLICT (tag_id, ts) DO NOTHING`);
        const inserted = ins.rowCount ?? 0;
        const insertSec = sec(t);
        t = performance.now();
        if (inserted > 0 && windows.length) await rebuildRollups(c, windows);
        await c.query('COMMIT');
        return { inserted, insertSec, rollupSec: sec(t) };
      } catch (err) {
        await c.query('ROLLBACK').catch(() => {});
        throw err;
      } finally {
        c.release();
      }
    },

    /**
     * The SQL path of a long-layout import. Staging: PostgreSQL's COPY lands the rows LineScanner
     * checked and typed (server/jobs/history-scan.ts) in a temporary table, and one pass over it
     * gives the minute buckets of the file (stageMinutes), its tags' windows and its UTC days. A
     * dry run stops there. The move, one transaction on a second connection: the day partitions,
     * then the staged rows into `samples` by binary COPY (pipeCopy) in steps of the staging
     * table's pages (the job's progress moves between them), then the rollups and tag_latest. A
     * tag with a sample already in its window's hours (a file stored before, or ingest's) makes
     * each step go through ON CONFLICT DO NOTHING and the rollups be rebuilt from `samples`;
     * otherwise COPY inserts (no speculative insertion per row) and the rollups are the file's own
     * buckets. A key twice in the file takes the first form too. Refused (SqlPathRefused, nothing
     * stored) when PostgreSQL's input functions refuse a line: the caller then runs the csv-parse
     * path, whose line checks are the reference for what is accepted and which lines to fix.
     */
    async sqlImport(a: SqlImportInput): Promise<SqlImportResult> {
      // The staging connection, and the move's (opened after the staging).
      const c = await pool.connect();
      let m: Conn | null = null;
      const sec = (t: number) => Math.round((performance.now() - t) / 100) / 10;
      try {
        // A background job: the API pool's statement_timeout bounds requests, not a file of millions of lines.
        await c.query('SET statement_timeout = 0');
        await c.query(`SET timezone = 'UTC'`);
        // The file's minute buckets (a few hundred thousand for ten million rows) hashed in memory
        // rather than sorted on disk; this one connection, which is closed after the job.
        await c.query(`SET work_mem = '64MB'`);
        // Temporary: private to this connection, never WAL-logged, gone with the connection whatever happens.
        await c.query(`CREATE TEMP TABLE history_rows (tag_id integer NOT NULL, ts timestamptz NOT NULL, value double precision, quality smallint NOT NULL)`);
        let t = performance.now();
        let rows: number;
        try {
          const copy = c.query(copyFrom(`COPY history_rows (tag_id, ts, value, quality) FROM STDIN`));
          await pipeline(a.source, copy);
          rows = copy.rowCount;
        } catch (err) {
          if (isDataError(err)) throw new SqlPathRefused(`COPY: ${(err as Error).message}`);
          throw err;
        }
        const copySec = sec(t);
        await a.copied(rows);
        t = performance.now();
        await stageMinutes(c);
        const win = await c.query(
          `SELECT tag_id, (extract(epoch FROM min(first_ts)) * 1000)::float8 AS lo, (extract(epoch FROM max(last_any)) * 1000)::float8 AS hi FROM history_minutes GROUP BY tag_id ORDER BY tag_id`,
        );
        const windows: TagWindow[] = win.rows.map((x) => ({ tagId: x.tag_id, from_ms: x.lo, to_ms: x.hi }));
        const days = (await c.query(`SELECT DISTINCT date_bin('1 day', bucket, ${BIN_ORIGIN}) AS d FROM history_minutes ORDER BY 1`)).rows.map((x) => x.d as Date);
        const minutesSec = sec(t);
        await a.progress(0.1);
        if (a.dryRun) return { rows, inserted: null, windows, timing: { copySec, minutesSec, insertSec: 0, rollupSec: 0, moveSteps: 0, conflicts: 'none' } };

        // The move: one transaction on a connection of its own, fed from the staging table by COPY.
        m = await pool.connect();
        await m.query('SET statement_timeout = 0');
        await m.query(`SET timezone = 'UTC'`);
        await m.query(`SET work_mem = '64MB'`);
        await m.query('BEGIN');
        for (const d of days) await m.query('SELECT flocstream_ensure_day_partition($1)', [d]);
        t = performance.now();
        const overlap = await m.query(
          `SELECT w.tag_id FROM unnest($1::int[], $2::timestamptz[], $3::timestamptz[]) AS w(tag_id, lo, hi)
            WHERE EXISTS (SELECT 1 FROM samples s WHERE s.tag_id = w.tag_id AND s.ts >= w.lo AND s.ts < w.hi)`,
          hourWindows(windows),
        );
        let conflicts: SqlImportResult['timing']['conflicts'] = overlap.rows.length ? 'overlap' : 'none';
        const pages = Number((await c.query(`SELECT pg_relation_size('history_rows') / current_setting('block_size')::int AS n`)).rows[0].n);
        // Steps of whole pages by ctid (a TID range scan reads only those pages): the progress
        // moves between them, each a statement of the same transaction.
        const step = Math.max(MOVE_MIN_PAGES, Math.ceil(pages / MOVE_STEPS));
        const ranges: string[] = [];
        for (let p = 0; p === 0 || p < pages; p += step) ranges.push(p + step >= pages ? `ctid >= '(${p},0)'::tid` : `ctid >= '(${p},0)'::tid AND ctid < '(${p + step},0)'::tid`);
        const staged = (range: string) => `SELECT tag_id, ts, value, quality FROM history_rows WHERE ${range}`;
        const mc = m;
        const stepDone = (i: number) => a.progress(0.1 + (0.7 * (i + 1)) / ranges.length);
        let inserted = 0;
        if (conflicts === 'none') {
          await mc.query('SAVEPOINT plain');
          try {
            for (const [i, range] of ranges.entries()) {
              inserted += await pipeCopy(c, staged(range), mc, 'samples (tag_id, ts, value, quality)');
              await stepDone(i);
            }
          } catch (err) {
            // A key twice in the file: the form below, which keeps the first of them.
            if ((err as { code?: string }).code !== '23505') throw err;
            await mc.query('ROLLBACK TO SAVEPOINT plain');
            conflicts = 'duplicate';
            inserted = 0;
          }
        }
        if (conflicts !== 'none') {
          await mc.query(`CREATE TEMP TABLE history_rows_in (tag_id integer, ts timestamptz, value double precision, quality smallint) ON COMMIT DROP`);
          for (const [i, range] of ranges.entries()) {
            await pipeCopy(c, staged(range), mc, 'history_rows_in (tag_id, ts, value, quality)');
            inserted += (await mc.query(`INSERT INTO samples (tag_id, ts, value, quality) SELECT tag_id, ts, value, quality FROM history_rows_in ON CONFLICT (tag_id, ts) DO NOTHING`)).rowCount ?? 0;
            await mc.query('TRUNCATE history_rows_in');
            await stepDone(i);
          }
        }
        const insertSec = sec(t);
        t = performance.now();
        const rollupProgress = (share: number) => a.progress(0.8 + 0.2 * share);
        if (inserted > 0 && windows.length) {
          if (conflicts === 'none') await rollupsFromStage(c, mc, windows, rollupProgress);
          else await rebuildRollups(mc, windows, rollupProgress);
        }
        await mc.query('COMMIT');
        return { rows, inserted, windows, timing: { copySec, minutesSec, insertSec, rollupSec: sec(t), moveSteps: ranges.length, conflicts } };
      } catch (err) {
        await m?.query('ROLLBACK').catch(() => {});
        if (isDataError(err) && !(err instanceof SqlPathRefused)) throw new SqlPathRefused((err as Error).message);
        throw err;
      } finally {
        // The temporary tables and the session settings go with the connections.
        c.release(true);
        m?.release(true);
      }
    },
    /** Minute buckets of the tags in [from, to] (bucket time), in time order per tag. */
    async minutes(tagIds: readonly number[], from: Date, to: Date): Promise<Map<number, MinuteRow[]>> {
      const out = new Map<number, MinuteRow[]>();
      if (!tagIds.length) return out;
      const r = await pool.query({
        text: `SELECT tag_id, (extract(epoch FROM bucket) * 1000)::float8 AS t, sum / NULLIF(count, 0) AS mean, quality, last, (extract(epoch FROM last_ts) * 1000)::float8 AS lt
                 FROM rollup_1m WHERE tag_id = ANY($1::int[]) AND bucket >= $2 AND bucket <= $3 ORDER BY tag_id, bucket`,
        values: [tagIds, from, to],
        rowMode: 'array',
      });
      for (const [tagId, t, mean, q, last, lt] of r.rows as [number, number, number | null, number, number, number][]) {
        if (mean === null) continue;
        let a = out.get(tagId);
        if (!a) out.set(tagId, (a = []));
        a.push({ tagId, t_ms: t, mean, qualityCode: q, last, lastTs_ms: lt });
      }
      return out;
    },
    /** Every SVI/DSVI of the plant, oldest first (the recompute takes the latest before each time). */
    async svis(plantId: number) {
      const r = await pool.query(`SELECT kind, value, unit, sampled_at, flags FROM lab_results WHERE plant_id = $1 AND kind IN ('SVI','DSVI') ORDER BY sampled_at`, [plantId]);
      return r.rows.map((x) => ({ kind: x.kind as 'SVI' | 'DSVI', value_mLg: x.value as number, unit: x.unit as string, sampledAt_ms: (x.sampled_at as Date).getTime(), flags: x.flags as string[] }));
    },
    /** Times of live (not recomputed) balances in [from, to]. */
    async liveBalanceTimes(plantId: number, from: Date, to: Date): Promise<number[]> {
      const r = await pool.query(`SELECT (extract(epoch FROM ts) * 1000)::float8 AS t FROM balances WHERE plant_id = $1 AND NOT recomputed AND ts >= $2 AND ts <= $3 ORDER BY ts`, [plantId, from, to]);
      return r.rows.map((x) => x.t as number);
    },
    async deleteRecomputed(plantId: number, from: Date, to: Date): Promise<number> {
      const r = await pool.query(`DELETE FROM balances WHERE plant_id = $1 AND recomputed AND ts >= $2 AND ts <= $3`, [plantId, from, to]);
      return r.rowCount ?? 0;
    },
    /** Recomputed balances, marked so (balances.recomputed). */
    async insertRecomputed(rows: readonly Balance[]): Promise<void> {
      if (!rows.length) return;
      await pool.query(
        `INSERT INTO balances (plant_id, ts, quality, data, inputs, recomputed)
         SELECT plant_id, ts, quality, data, inputs, true FROM jsonb_to_recordset($1::jsonb) AS x(plant_id int, ts timestamptz, quality text, data jsonb, inputs jsonb)`,
        [JSON.stringify(rows.map((b) => ({ plant_id: b.plantId, ts: b.ts, quality: b.quality, data: b.data, inputs: b.inputs })))],
      );
    },
    /** Newest sample time of any tag of the plant (the demo resumes its simulation after it), or null. */
    async lastSampleTime(plantId: number): Promise<Date | null> {
      const r = await pool.query(`SELECT max(l.ts) AS m FROM tag_latest l JOIN tags t ON t.id = l.tag_id WHERE t.plant_id = $1`, [plantId]);
      return (r.rows[0]?.m as Date | null) ?? null;
    },
  };
}
export type HistoryRepository = ReturnType<typeof historyRepository>;
