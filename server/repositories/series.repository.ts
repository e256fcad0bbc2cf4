import type pg from 'pg';

/**
 * Tag history reads: raw `samples` and the `rollup_1m` / `rollup_1h` tables, bucketed in SQL with
 * `date_bin` (PostgreSQL ≥ 14) on buckets aligned to the Unix epoch, so the buckets of one step
 * are the same whichever window asks for them. Named statements: the plans are prepared once per
 * connection and partition pruning on `samples` happens at execution.
 *
 * Bucketed raw reads leave out samples without a value or with a Bad grade, exactly as ingest's
 * rollups do (ingest/sink/rollup.ts), so every resolution aggregates the same samples. A bucket
 * with nothing in it is no row: gaps stay gaps.
 *
 * Measured (tests/bench/api.bench.ts): grouping 30 days of rollup_1m (43 200 rows) sorts on the
 * bucket expression, which spills to disk under the default 4 MB work_mem; the bucket queries
 * therefore run in a read-only transaction with `SET LOCAL work_mem` (never leaking into the
 * pooled session). The bucket's `last` needs an ordered aggregate per bucket, the costliest part
 * of the query, so it is computed only when asked for (agg=last).
 */
export interface RawRow {
  ts: Date;
  value: number | null;
  quality: number;
}
export interface BucketRow {
  ts: Date;
  mean: number;
  min: number;
  max: number;
  count: number;
  /** null unless asked for (`withLast`). */
  last: number | null;
  quality: number;
}

/** Sort memory for one bucket query: 30 days of rollup_1m sort in well under this. */
const BUCKET_WORK_MEM = '16MB';

const RAW = `SELECT ts, value, quality FROM samples WHERE tag_id = $1 AND ts > $2 AND ts < $3 ORDER BY ts LIMIT $4`;
const RAW_FIRST = `SELECT ts, value, quality FROM samples WHERE tag_id = $1 AND ts >= $2 AND ts < $3 ORDER BY ts LIMIT $4`;
const RAW_COUNT = `SELECT count(*)::int AS n FROM (SELECT 1 FROM samples WHERE tag_id = $1 AND ts >= $2 AND ts < $3 LIMIT $4) s`;
const lastOf = (col: string, ts: string, withLast: boolean) => (withLast ? `(array_agg(${col} ORDER BY ${ts} DESC))[1]` : 'NULL::float8');
const rawBuckets = (withLast: boolean) => `SELECT date_bin(make_interval(secs => $4::float8), ts, timestamptz 'epoch') AS ts,
    avg(value) AS mean, min(value) AS min, max(value) AS max, count(*)::int AS count,
    ${lastOf('value', 'ts', withLast)} AS last,
    (bit_or(quality & ~3) | max(quality & 3))::int AS quality
  FROM samples
  WHERE tag_id = $1 AND ts >= $2 AND ts < $3 AND value IS NOT NULL AND (quality & 3) < 2
  GROUP BY 1 ORDER BY 1 LIMIT $5`;
const rollupBuckets = (table: 'rollup_1m' | 'rollup_1h', withLast: boolean) => `SELECT date_bin(make_interval(secs => $4::float8), bucket, timestamptz 'epoch') AS ts,
    sum(sum) / sum(count) AS mean, min(min) AS min, max(max) AS max, sum(count)::bigint AS count,
    ${lastOf('last', 'last_ts', withLast)} AS last,
    (bit_or(quality & ~3) | max(quality & 3))::int AS quality
  FROM ${table}
  WHERE tag_id = $1 AND bucket >= $2 AND bucket < $3
  GROUP BY 1 ORDER BY 1 LIMIT $5`;
const BUCKETS = {
  raw: [rawBuckets(false), rawBuckets(true)],
  '1m': [rollupBuckets('rollup_1m', false), rollupBuckets('rollup_1m', true)],
  '1h': [rollupBuckets('rollup_1h', false), rollupBuckets('rollup_1h', true)],
} as const;

export function seriesRepository(pool: pg.Pool) {
  return {
    /** Raw samples in [from, to) — or (after, to) for a next page — ascending, at most `limit`. */
    async raw(tagId: number, from: Date, to: Date, limit: number, exclusiveFrom: boolean): Promise<RawRow[]> {
      const r = await pool.query<RawRow>({ name: exclusiveFrom ? 'series_raw_next' : 'series_raw', text: exclusiveFrom ? RAW : RAW_FIRST, values: [tagId, from, to, limit] });
      return r.rows;
    },
    /** How many raw samples lie in [from, to), counting no further than `cap` (cheap: stops at cap). */
    async rawCountUpTo(tagId: number, from: Date, to: Date, cap: number): Promise<number> {
      const r = await pool.query<{ n: number }>({ name: 'series_raw_count', text: RAW_COUNT, values: [tagId, from, to, cap] });
      return r.rows[0]?.n ?? 0;
    },
    /** Buckets of `step_s` seconds over [from, to) from raw samples or a rollup table, ascending. */
    async buckets(source: 'raw' | '1m' | '1h', tagId: number, from: Date, to: Date, step_s: number, limit: number, withLast: boolean): Promise<BucketRow[]> {
      const c = await pool.connect();
      try {
        await c.query('BEGIN READ ONLY');
        await c.query(`SET LOCAL work_mem = '${BUCKET_WORK_MEM}'`);
        const r = await c.query<BucketRow>({ name: `series_buckets_${source}_${withLast ? 'last' : 'nolast'}`, text: BUCKETS[source][withLast ? 1 : 0], values: [tagId, from, to, step_s, limit] });
        await c.query('COMMIT');
        c.release();
        return r.rows;
      } catch (err) {
        // A connection in an unknown transaction state is not given back to the pool.
        c.release(true);
        throw err;
      }
    },
  };
}
export type SeriesRepository = ReturnType<typeof seriesRepository>;
