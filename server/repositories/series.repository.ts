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
 * on samples and rollup_1m therefore run in a read-only transaction with `SET LOCAL work_mem`
 * (never leaking into the pooled session). The bucket's `last` needs an ordered aggregate per
 * bucket, the costliest part of the query, so it is computed only when asked for (agg=last).
 */
/**
 * Raw rows come back as one JSON array built by PostgreSQL (`json_agg` of positional arrays, the
 * timestamp both as ISO 8601 text and as epoch milliseconds), parsed by one JSON.parse: Node
 * then builds no row objects and parses no dates per point. (A raw value may be NULL, which
 * the packed form below has no room for.)
 *
 * Buckets come back packed: one `bytea` of fixed-width records, each field the 8-byte IEEE 754
 * double that `float8send` writes (float8's binary send function, network byte order; see
 * CREATE TYPE, "send_function", in the PostgreSQL documentation), in the order of
 * BUCKET_FIELDS, with the number of records beside it; the ISO text is made in Node. The decoded
 * doubles are the computed ones to the bit, where text would be printed and parsed back.
 * Measured on the bench:api data (one year as 1461 six-hour buckets of rollup_1h): PostgreSQL's
 * execution time (EXPLAIN ANALYZE, median of 60) is 2.7 ms for the aggregation, 2.2 ms more to
 * print it as JSON (`to_char`, `float8out`, `json_build_array` per point), 0.5 ms more to pack
 * it; with `npm run bench:api` (median of 3 rounds) the mixed-load p99 went from 249 to 201 ms
 * and the one-year answer's CPU (API + PostgreSQL) from 9.2 to 7.3 ms.
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

/** The fields of a packed bucket record, each a float8; `last` only when asked for. */
const BUCKET_FIELDS = ['date_part(\'epoch\', x.ts) * 1000', 'x.mean', 'x.min', 'x.max', 'x.count', 'x.quality'];
/**
 * Every field is NOT NULL (a bucket has at least one valued sample): a NULL would drop its whole
 * record from string_agg, which `n` beside it makes loud (unpackBuckets).
 */
const packed = (withLast: boolean, inner: string) =>
  `SELECT count(*)::int AS n, string_agg(${[...BUCKET_FIELDS, ...(withLast ? ['x.last'] : [])].map((f) => `float8send((${f})::float8)`).join(' || ')}, ''::bytea ORDER BY x.ts) AS packed FROM (${inner}) x`;

const RAW = agg(RAW_COLS, `SELECT ts, value, quality FROM samples WHERE tag_id = $1 AND ts > $2 AND ts < $3 ORDER BY ts LIMIT $4`);
const RAW_FIRST = agg(RAW_COLS, `SELECT ts, value, quality FROM samples WHERE tag_id = $1 AND ts >= $2 AND ts < $3 ORDER BY ts LIMIT $4`);
const RAW_COUNT = `SELECT count(*)::int AS n FROM (SELECT 1 FROM samples WHERE tag_id = $1 AND ts >= $2 AND ts < $3 LIMIT $4) s`;
const lastOf = (col: string, ts: string, withLast: boolean) => (withLast ? `(array_agg(${col} ORDER BY ${ts} DESC))[1]` : 'NULL::float8');
const rawBuckets = (withLast: boolean) => packed(withLast, `SELECT date_bin(make_interval(secs => $4::float8), ts, timestamptz 'epoch') AS ts,
    avg(value) AS mean, min(value) AS min, max(value) AS max, count(*) AS count,
    ${lastOf('value', 'ts', withLast)} AS last,
    (bit_or(quality & ~3) | max(quality & 3))::int AS quality
  FROM samples
  WHERE tag_id = $1 AND ts >= $2 AND ts < $3 AND value IS NOT NULL AND (quality & 3) < 2
  GROUP BY 1 ORDER BY 1 LIMIT $5`);
// The counts are summed as float8 (exact below 2^53): sum(bigint) would accumulate in numeric.
const rollupBuckets = (table: 'rollup_1m' | 'rollup_1h', withLast: boolean) => packed(withLast, `SELECT date_bin(make_interval(secs => $4::float8), bucket, timestamptz 'epoch') AS ts,
    sum(sum) / sum(count::float8) AS mean, min(min) AS min, max(max) AS max, sum(count::float8) AS count,
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

/** The records of a packed bucket answer (see `packed`) as BucketRows. */
export function unpackBuckets(n: number, buf: Buffer | null, withLast: boolean): BucketRow[] {
  const width = 8 * (BUCKET_FIELDS.length + (withLast ? 1 : 0));
  const bytes = buf?.length ?? 0;
  if (bytes !== n * width) throw new Error(`packed buckets: ${bytes} bytes for ${n} records of ${width}`);
  const rows: BucketRow[] = new Array(n);
  const b = buf ?? Buffer.alloc(0);
  for (let i = 0, o = 0; i < n; i++, o += width) {
    const ms = b.readDoubleBE(o);
    rows[i] = [new Date(ms).toISOString(), ms, b.readDoubleBE(o + 8), b.readDoubleBE(o + 16), b.readDoubleBE(o + 24), b.readDoubleBE(o + 32), withLast ? b.readDoubleBE(o + 48) : null, b.readDoubleBE(o + 40)];
  }
  return rows;
}

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
      const query = { name: `series_buckets_${source}_${withLast ? 'last' : 'nolast'}`, text: BUCKETS[source][withLast ? 1 : 0], values: [tagId, from, to, step_s, limit] };
      // rollup_1h holds one row per tag-hour: a year of one tag sorts in about 1.1 MB (EXPLAIN
      // ANALYZE on the bench data), within the default 4 MB work_mem (a window of decades spills
      // its sort to disk, slower but bounded by statement_timeout), and the planner plans no
      // parallel workers for it: one statement on the pool, no transaction.
      // Measured with `npm run bench:api` (mixed load, median of 3 rounds): the two extra round
      // trips held a pooled connection each time, and dropping them for this table took the p99
      // from 244 to 201 ms.
      if (source === '1h') {
        const r = await pool.query<{ n: number; packed: Buffer | null }>(query);
        return unpackBuckets(r.rows[0]!.n, r.rows[0]!.packed, withLast);
      }
      const c = await pool.connect();
      try {
        // One round trip for all three (a simple-protocol query may hold several statements). No
        // parallel workers: the planner gave the 30-day query a Gather Merge over two processes,
        // whose start-up and merge cost CPU that 50 concurrent requests would rather share out.
        await c.query(`BEGIN READ ONLY; SET LOCAL work_mem = '${BUCKET_WORK_MEM}'; SET LOCAL max_parallel_workers_per_gather = 0`);
        const r = await c.query<{ n: number; packed: Buffer | null }>(query);
        await c.query('COMMIT');
        c.release();
        return unpackBuckets(r.rows[0]!.n, r.rows[0]!.packed, withLast);
      } catch (err) {
        // A connection in an unknown transaction state is not given back to the pool.
        c.release(true);
        throw err;
      }
    },
  };
}
export type SeriesRepository = ReturnType<typeof seriesRepository>;
