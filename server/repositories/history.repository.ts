import { Writable } from 'node:stream';
import { from as copyFrom } from 'pg-copy-streams';
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
      // Created by a function with the owner's rights: the API role may not create tables (drizzle/0011).
      await c.query('SELECT flocstream_open_history_stage($1)', [jobId]);
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
          try {
            await done;
          } finally {
            c.release();
          }
        },
        async abort(): Promise<void> {
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
    async move(jobId: number, days: readonly number[], windows: readonly TagWindow[]): Promise<number> {
      const c = await pool.connect();
      try {
        await c.query('BEGIN');
        // Minute and hour buckets are UTC (date_trunc follows the session's zone).
        await c.query(`SET LOCAL timezone = 'UTC'`);
        for (const d of [...days].sort((a, b) => a - b)) await c.query('SELECT flocstream_ensure_day_partition($1)', [new Date(d * 86_400_000)]);
        const ins = await c.query(`INSERT INTO samples (tag_id, ts, value, quality) SELECT tag_id, ts, value, quality FROM history_stage_${jobId} ON CONFLICT (tag_id, ts) DO NOTHING`);
        const inserted = ins.rowCount ?? 0;
        if (inserted > 0 && windows.length) {
          const w = hourWindows(windows);
          // A sample without a value or graded bad is left out, as ingest does (ingest/sink/rollup.ts).
          // last: the value of the newest sample, as max over (epoch, value) pairs (arrays compare element by element).
          await c.query(
            `INSERT INTO rollup_1m AS r (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
             SELECT s.tag_id, date_trunc('minute', s.ts), min(s.value), max(s.value), sum(s.value), count(*),
                    (max(ARRAY[extract(epoch FROM s.ts)::float8, s.value]))[2], max(s.ts),
                    ((bit_or(s.quality) & ~3) | max(s.quality & 3))::int2
               FROM unnest($1::int[], $2::timestamptz[], $3::timestamptz[]) AS w(tag_id, lo, hi)
               JOIN samples s ON s.tag_id = w.tag_id AND s.ts >= w.lo AND s.ts < w.hi
              WHERE s.value IS NOT NULL AND (s.quality & 3) < 2
              GROUP BY 1, 2
             ON CONFLICT (tag_id, bucket) DO UPDATE SET ${ROLLUP_SET}`,
            w,
          );
          await c.query(
            `INSERT INTO rollup_1h AS r (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
             SELECT m.tag_id, date_trunc('hour', m.bucket), min(m.min), max(m.max), sum(m.sum), sum(m.count),
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
        await c.query('COMMIT');
        return inserted;
      } catch (err) {
        await c.query('ROLLBACK').catch(() => {});
        throw err;
      } finally {
        c.release();
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
