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
/**
 * Rows come back as one JSON array built by PostgreSQL (`json_agg` of positional arrays, the
 * timestamp both as ISO 8601 text and as epoch milliseconds), parsed by one JSON.parse: Node
 * then builds no row objects and parses no dates per point. Measured with `npm run bench:api`
 * (the 30-day and one-year queries each answer ~700–2000 points): the per-row parse and
 * Date/ISO round trip were the largest part of the API's CPU per history request.
 */
/** A raw sample: [ts ISO 8601 (ms), ts epoch ms, value, quality]. */
export type RawRow = [ts: string, ts_ms: number, value: number | null, quality: number];
/** A bucket: [ts ISO 8601 (ms), ts epoch ms, mean, min, max, count, last (null unless asked for), quality]. */
export type BucketRow = [ts: string, ts_ms: number, mean: number, min: number, max: number, count: number, last: number | null, quality: number];

/** Sort memory for one bucket query: 30 days of rollup_1m sort in well under this. */
const BUCKET_WORK_MEM = '16MB';

/** The same text as Date.prototype.toISOString (UTC, milliseconds). */
const isoOf = (col: string) => `to_char(${col} AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.MS"Z"')`;
const msOf = (col: string) => `(extract(epoch FROM ${col}) * 1000)::float8`;
const agg = (cols: string, inner: string) => `SELECT coalesce(json_agg(json_build_array(${cols}) ORDER BY x.ts), '[]'::json) AS rows FROM (${inner}) x`;
const RAW_COLS = `${isoOf('x.ts')}, ${msOf('x.ts')}, x.value, x.quality`;
const BUCKET_COLS = `${isoOf('x.ts')}, ${msOf('x.ts')}, x.mean, x.min, x.max, x.count, x.last, x.quality`;

const RAW = agg(RAW_COLS, `SELECT ts, value, quality FROM samples WHERE tag_id = $1 AND ts > $2 AND ts < $3 ORDER BY ts LIMIT $4`);
const RAW_FIRST = agg(RAW_COLS, `SELECT ts, value, quality FROM samples WHERE tag_id = $1 AND ts >= $2 AND ts < $3 ORDER BY ts LIMIT $4`);
const RAW_COUNT = `SELECT count(*)::int AS n FROM (SELECT 1 FROM samples WHERE tag_id = $1 AND ts >= $2 AND ts < $3 LIMIT $4) s`;
const lastOf = (col: string, ts: string, withLast: boolean) => (withLast ? `(array_agg(${col} ORDER BY ${ts} DESC))[1]` : 'NULL::float8');
const rawBuckets = (withLast: boolean) => agg(BUCKET_COLS, `SELECT date_bin(make_interval(secs => $4::float8), ts, timestamptz 'epoch') AS ts,
    avg(value) AS mean, min(value) AS min, max(value) AS max, count(*)::int AS count,
    ${lastOf('value', 'ts', withLast)} AS last,
    (bit_or(quality & ~3) | max(quality & 3))::int AS quality
  FROM samples
  WHERE tag_id = $1 AND ts >= $2 AND ts < $3 AND value IS NOT NULL AND (quality & 3) < 2
  GROUP BY 1 ORDER BY 1 LIMIT $5`);
const rollupBuckets = (table: 'rollup_1m' | 'rollup_1h', withLast: boolean) => agg(BUCKET_COLS, `SELECT date_bin(make_interval(secs => $4::float8), bucket, timestamptz 'epoch') AS ts,
    sum(sum) / sum(count) AS mean, min(min) AS min, max(max) AS max, sum(count)::bigint AS count,
    ${lastOf('last', 'last_ts', withLast)} AS last,
    (bit_or(quality & ~3) | max(quality & 3))::int AS quality
  FROM ${table}
  WHERE tag_id = $1 AND bucket >= $2 AND bucket < $3
  GROUP BY 1 ORDER BY 1 LIMIT $5`);
const BUCKETS = {
  raw: [rawBuckets(false), rawBuckets(true)],
  '1m': [rollupBuckets('rollup_1m', false), rollupBuckets('rollup_1m', true)],
  '1h': [rollupBuckets('rollup_1h', false), rollupBuckets('rollup_1h', true)],
} as const;

export function seriesRepository(pool: pg.Pool) {
  return {
    /** Raw samples in [from, to) — or (after, to) for a next page — ascending, at most `limit`. */
    async raw(tagId: number, from: Date, to: Date, limit: number, exclusiveFrom: boolean): Promise<RawRow[]> {
      const r = await pool.query<{ rows: RawRow[] }>({ name: exclusiveFrom ? 'series_raw_next' : 'series_raw', text: exclusiveFrom ? RAW : RAW_FIRST, values: [tagId, from, to, limit] });
      return r.rows[0]?.rows ?? [];
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
        // One round trip for all three (a simple-protocol query may hold several statements). No
        // parallel workers: the planner gave the 30-day query a Gather Merge over two processes,
        // whose start-up and merge cost CPU that 50 concurrent requests would rather share out.
        await c.query(`BEGIN READ ONLY; SET LOCAL work_mem = '${BUCKET_WORK_MEM}'; SET LOCAL max_parallel_workers_per_gather = 0`);
        const r = await c.query<{ rows: BucketRow[] }>({ name: `series_buckets_${source}_${withLast ? 'last' : 'nolast'}`, text: BUCKETS[source][withLast ? 1 : 0], values: [tagId, from, to, step_s, limit] });
        await c.query('COMMIT');
        c.release();
        return r.rows[0]?.rows ?? [];
      } catch (err) {
        // A connection in an unknown transaction state is not given back to the pool.
        c.release(true);
        throw err;
      }
    },
  };
}
export type SeriesRepository = ReturnType<typeof seriesRepository>;
