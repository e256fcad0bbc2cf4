import type { Readable, Writable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import type pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import { QUALITY_FLAG, QUALITY_GRADE } from '../../shared/contracts/sample-quality.ts';
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
const DAY_MS = 86_400_000;
/** Origin of date_bin's buckets: a UTC midnight, so minutes, hours and days are UTC ones. */
const BIN_ORIGIN = `timestamptz '2000-01-01 00:00:00+00'`;

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

/** A tag as the file names it (long layout: the tag field, which may carry a `[unit]`), resolved by the line checks. */
export interface SqlTagEntry {
  text: string;
  tagId: number;
  factor: number;
  rangeLow: number | null;
  rangeHigh: number | null;
}

export interface SqlPlan {
  /** Every tag field text of the file, resolved. */
  tags: readonly SqlTagEntry[];
  /** UTC days (epoch day numbers) the file's timestamps name; a missed one is repaired after the insert. */
  days: readonly number[];
  /** Per tag id, the first and last day the file names [epoch days]. */
  dayRange: ReadonlyMap<number, [number, number]>;
  /** Some timestamp has a ±HH:MM offset (its UTC day may differ from the day it names). */
  offsets: boolean;
}

export interface SqlImportInput {
  /** The file's bytes, header line included (COPY skips it). */
  source: Readable;
  delimiter: ',' | ';' | '\t';
  /** The header has the quality column. */
  withQuality: boolean;
  dryRun: boolean;
  /**
   * Called once COPY has the whole file, with the rows it took: the tag map and the days, or a
   * SqlPathRefused thrown.
   */
  plan: (copied: number) => Promise<SqlPlan>;
}

export interface SqlImportResult {
  rows: number;
  /** Rows inserted into samples (null for a dry run). */
  inserted: number | null;
  windows: TagWindow[];
  timing: { copySec: number; insertSec: number; rollupSec: number };
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

/*
 * The SQL path's conversion. Its text forms are checked before (server/jobs/history-scan.ts,
 * LineScanner): PostgreSQL's input functions are more lenient than the line checks, and a
 * regular expression or character-set test per field here cost more than the insert itself.
 * What is left here: the quality words and codes, the empty value, a finite value, and a field
 * out of range, which the input functions refuse (a data error, which refuses the file for this
 * path). tests/integration/history-sql-path.test.ts checks scan and conversion together against
 * the line checks (RowChecker).
 * - quality: good/uncertain/bad in lower, Title or UPPER case, or a code of up to five digits
 *   that fits int2 (int2 input refuses more);
 * - value: float8 input (strtod, correctly rounded, as JavaScript's Number()), finite (float8
 *   input takes NaN and Infinity, the line checks refuse them); empty only with quality bad.
 */
function qualityExpr(withQuality: boolean): string {
  if (!withQuality) return `${QUALITY_GRADE.good}`;
  const uncertain = QUALITY_GRADE.uncertain | QUALITY_FLAG.sourceStatus;
  const bad = QUALITY_GRADE.bad | QUALITY_FLAG.sourceStatus;
  return `CASE WHEN r.quality IS NULL OR r.quality IN ('', 'good', 'Good', 'GOOD') THEN ${QUALITY_GRADE.good}
               WHEN r.quality IN ('bad', 'Bad', 'BAD') THEN ${bad}
               WHEN r.quality IN ('uncertain', 'Uncertain', 'UNCERTAIN') THEN ${uncertain}
               WHEN r.quality NOT LIKE '%-%' AND r.quality NOT LIKE '%+%' AND r.quality NOT LIKE '% %' AND length(r.quality) <= 5 THEN r.quality::int2
               ELSE ('quality ' || r.quality)::int2 END`;
}

const VALUE_EXPR = `CASE WHEN r.value <> '' THEN r.value::float8 * m.factor
               WHEN coalesce(r.value, '') = '' AND (q.q & 3) = ${QUALITY_GRADE.bad} THEN NULL
               ELSE ('value ' || coalesce(r.value, ''))::float8 END`;

/**
 * The rows of `history_raw` as samples: tag id (null for a tag field outside the map $1…$5),
 * time, value in the tag's unit, quality with the range flag (as RowChecker does); a line
 * PostgreSQL or these guards refuse raises a data error. Timestamps without an offset are read
 * in the session's zone, which sqlImport sets to UTC. Exported for the equivalence test.
 */
export function sqlSamplesSelect(a: { withQuality: boolean }): string {
  return `SELECT x.tag_id, x.ts,
                 CASE WHEN x.v IS NULL OR (x.v > '-Infinity'::float8 AND x.v < 'Infinity'::float8) THEN x.v ELSE ('value ' || x.v::text)::float8 END,
                 CASE WHEN x.v < x.lo OR x.v > x.hi THEN ((x.q & ~3) | ${QUALITY_FLAG.outOfRange} | greatest(x.q & 3, ${QUALITY_GRADE.uncertain}))::int2 ELSE x.q::int2 END
            FROM (SELECT m.tag_id, r.ts::timestamptz AS ts, ${VALUE_EXPR} AS v, q.q, m.lo, m.hi
                    FROM history_raw r
                    LEFT JOIN unnest($1::text[], $2::int[], $3::float8[], $4::float8[], $5::float8[]) AS m(text, tag_id, factor, lo, hi) ON m.text = r.tag
                    CROSS JOIN LATERAL (SELECT ${qualityExpr(a.withQuality)} AS q) q) x`;
}

/**
 * The minute rollups of each tag's window rebuilt from `samples` over whole hours, the hour
 * rollups from those minutes, and tag_latest where the window holds a newer sample; inside the
 * caller's transaction. A sample without a value or graded bad is left out, as ingest does
 * (ingest/sink/rollup.ts). Buckets are date_bin's UTC minutes and hours (plain arithmetic on
 * the timestamp, where date_trunc converts each one to the session's zone), and a bucket's
 * `last` is read back by its newest time through the primary key: one lookup per bucket
 * instead of an array built per sample (0.9 s against 1.7 s for a million samples, measured
 * with the bench's data).
 */
async function rebuildRollups(c: Conn, windows: readonly TagWindow[]): Promise<void> {
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
     * The SQL path of a long-layout import: PostgreSQL parses the file (COPY … FORMAT csv into a
     * text-typed temporary table, in file order), and one INSERT … SELECT converts, checks and
     * stores it in a transaction with the day partitions, the rollups and tag_latest; a dry run
     * only converts. Refused (SqlPathRefused, nothing stored) at the first line outside the strict
     * forms above: the caller then runs the csv-parse path, whose line checks are the reference
     * for what is accepted and which lines to fix.
     */
    async sqlImport(a: SqlImportInput): Promise<SqlImportResult> {
      const c = await pool.connect();
      const sec = (t: number) => Math.round((performance.now() - t) / 100) / 10;
      try {
        // A background job: the API pool's statement_timeout bounds requests, not a file of millions of lines.
        await c.query('SET statement_timeout = 0');
        await c.query(`SET timezone = 'UTC'`);
        // Temporary: private to this connection, never WAL-logged, gone with the connection whatever happens.
        await c.query(`CREATE TEMP TABLE history_raw (tag text, ts text, value text, quality text)`);
        const delim = a.delimiter === '\t' ? `E'\\t'` : `'${a.delimiter}'`;
        let t = performance.now();
        let rows: number;
        try {
          const copy = c.query(copyFrom(`COPY history_raw (tag, ts, value${a.withQuality ? ', quality' : ''}) FROM STDIN (FORMAT csv, HEADER true, DELIMITER ${delim})`));
          await pipeline(a.source, copy);
          rows = copy.rowCount;
        } catch (err) {
          if (isDataError(err)) throw new SqlPathRefused(`COPY: ${(err as Error).message}`);
          throw err;
        }
        const copySec = sec(t);
        const plan = await a.plan(rows);
        const m = [plan.tags.map((x) => x.text), plan.tags.map((x) => x.tagId), plan.tags.map((x) => x.factor), plan.tags.map((x) => x.rangeLow), plan.tags.map((x) => x.rangeHigh)];
        if (a.dryRun) {
          t = performance.now();
          try {
            const r = await c.query(`SELECT tag_id, (extract(epoch FROM min(ts)) * 1000)::float8 AS lo, (extract(epoch FROM max(ts)) * 1000)::float8 AS hi, count(v) FILTER (WHERE v IS NULL) FROM (${sqlSamplesSelect(a)}) s (tag_id, ts, v, q) GROUP BY tag_id`, m);
            if (r.rows.some((x) => x.tag_id === null)) throw new SqlPathRefused('a tag field outside the map');
            return { rows, inserted: null, windows: r.rows.map((x) => ({ tagId: x.tag_id, from_ms: x.lo, to_ms: x.hi })), timing: { copySec, insertSec: sec(t), rollupSec: 0 } };
          } catch (err) {
            if (isDataError(err)) throw new SqlPathRefused(`check: ${(err as Error).message}`);
            throw err;
          }
        }
        await c.query('BEGIN');
        for (const d of [...plan.days].sort((x, y) => x - y)) await c.query('SELECT flocstream_ensure_day_partition($1)', [new Date(d * DAY_MS)]);
        t = performance.now();
        let inserted: number;
        try {
          // Plain first: a file new to `samples` (the common case) skips ON CONFLICT's speculative
          // insertion; a key already there (a file stored before, or ingest's) takes the second form.
          await c.query('SAVEPOINT plain');
          inserted = (await c.query(`INSERT INTO samples (tag_id, ts, value, quality) ${sqlSamplesSelect(a)}`, m)).rowCount ?? 0;
          if (inserted !== rows) throw new SqlPathRefused(`${inserted} of ${rows} rows inserted`);
        } catch (err) {
          if ((err as { code?: string }).code !== '23505') throw err;
          await c.query('ROLLBACK TO SAVEPOINT plain');
          inserted = (await c.query(`INSERT INTO samples (tag_id, ts, value, quality) ${sqlSamplesSelect(a)} ON CONFLICT (tag_id, ts) DO NOTHING`, m)).rowCount ?? 0;
        }
        const insertSec = sec(t);
        t = performance.now();
        // A row whose UTC day the scan did not name (an offset across midnight) went to the
        // default partition: give its day a partition (which moves the rows there).
        const stray = await c.query(`SELECT DISTINCT date_bin('1 day', ts, ${BIN_ORIGIN}) AS d FROM ONLY samples_default`);
        for (const x of stray.rows) await c.query('SELECT flocstream_ensure_day_partition($1)', [x.d]);
        // Each tag's window: its first and last sample in the days the file names (one day more
        // each side when a timestamp has an offset), read from the primary key's ends.
        const pad = plan.offsets ? 1 : 0;
        const windows: TagWindow[] = [];
        for (const [tagId, [d0, d1]] of plan.dayRange) {
          const w = await c.query(
            `SELECT (extract(epoch FROM min(ts)) * 1000)::float8 AS lo, (extract(epoch FROM max(ts)) * 1000)::float8 AS hi FROM samples WHERE tag_id = $1 AND ts >= $2 AND ts < $3`,
            [tagId, new Date((d0 - pad) * DAY_MS), new Date((d1 + 1 + pad) * DAY_MS)],
          );
          if (w.rows[0]?.lo != null) windows.push({ tagId, from_ms: w.rows[0].lo, to_ms: w.rows[0].hi });
        }
        if (inserted > 0 && windows.length) await rebuildRollups(c, windows);
        await c.query('COMMIT');
        return { rows, inserted, windows, timing: { copySec, insertSec, rollupSec: sec(t) } };
      } catch (err) {
        await c.query('ROLLBACK').catch(() => {});
        if (isDataError(err) && !(err instanceof SqlPathRefused)) throw new SqlPathRefused((err as Error).message);
        throw err;
      } finally {
        // The temporary table and the session settings go with the connection.
        c.release(true);
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
