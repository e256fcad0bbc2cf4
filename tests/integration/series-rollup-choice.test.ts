import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { samplesResponse, type SamplePoint } from '../../shared/contracts/plant-api.ts';
import { qualityFlags, qualityGrade } from '../../shared/contracts/sample-quality.ts';
import { seriesRepository } from '../../server/repositories/series.repository.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';

const T0 = Date.parse('2026-03-01T00:00:00Z');
const MIN = 60_000;
const H = 60 * MIN;
const D = 24 * H;
const iso = (ms: number) => new Date(ms).toISOString();

/**
 * 31 days of rollup_1m before T0 with varying counts, `last` timestamps and quality codes (every
 * 997th minute uncertain from the source, every 1499th out of range), a 3-hour gap and an hour
 * holding only its first 20 minutes; rollup_1h made from those minutes the way ingest merges
 * minutes into hours (ingest/sink/sample-store.ts: min of mins, max of maxes, sums of sums and
 * counts, the last of the latest last_ts, flags united and the worst grade).
 */
async function fixture(h: TestApp) {
  const q = (text: string, values: unknown[] = []) => h.ctx.db.pool.query(text, values);
  const plant = (await q(`INSERT INTO plants (code, name) VALUES ('rollups', 'Rollups') RETURNING id`)).rows[0].id as number;
  const src = (await q(`INSERT INTO sources (plant_id, name, kind, url) VALUES ($1, 'r', 'mqtt', 'mqtt://127.0.0.1:1') RETURNING id`, [plant])).rows[0].id as number;
  const tag = async (name: string) =>
    (await q(`INSERT INTO tags (plant_id, source_id, name, address, unit, expected_period_s) VALUES ($1, $2, $3, $3, 'g/L', 1) RETURNING id`, [plant, src, name])).rows[0].id as number;
  const mlss = await tag('AB1_MLSS');
  const codes = await tag('QUALITY_CODES');
  const gapLo = T0 - 10 * D + 5 * H;
  const partial = T0 - 4 * D + 7 * H;
  await q(
    `INSERT INTO rollup_1m (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
     SELECT $1, to_timestamp($2::float8 / 1000 + m * 60), v - 0.3 - (m % 5) * 0.01, v + 0.2 + (m % 7) * 0.01, v * (60 - m % 3), 60 - m % 3, v + (m % 11) * 0.01,
            to_timestamp($2::float8 / 1000 + m * 60 + 59 - m % 3),
            CASE WHEN m % 1499 = 0 THEN 9 WHEN m % 997 = 0 THEN 5 ELSE 0 END
     FROM (SELECT m, 3 + 0.5 * sin(m / 97.0) + (m % 13) / 1000.0 AS v FROM generate_series(0, 31 * 1440 - 1) m) x
     WHERE NOT (m * 60000::bigint + $2::bigint >= $3::bigint AND m * 60000::bigint + $2::bigint < $3::bigint + 3 * 3600000)
       AND NOT (m * 60000::bigint + $2::bigint >= $4::bigint + 20 * 60000 AND m * 60000::bigint + $2::bigint < $4::bigint + 3600000)`,
    [mlss, T0 - 31 * D, gapLo, partial],
  );
  await q(
    `INSERT INTO rollup_1h (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
     SELECT tag_id, date_trunc('hour', bucket), min(min), max(max), sum(sum), sum(count), (array_agg(last ORDER BY last_ts DESC))[1], max(last_ts), (bit_or(quality & ~3) | max(quality & 3))
     FROM rollup_1m WHERE tag_id = $1 GROUP BY 1, 2`,
    [mlss],
  );
  // One raw sample per possible quality code (2 grade bits and 5 flag bits), one second apart.
  await q(`INSERT INTO samples (tag_id, ts, value, quality) SELECT $1, to_timestamp($2::float8 / 1000 + c), CASE WHEN c % 4 = 2 THEN NULL ELSE c / 8.0 END, c FROM generate_series(0, 127) c`, [codes, T0 - H]);
  return { plant, mlss, codes, gapLo, partial };
}

/** The minute rollups of one hour bucket aggregated independently of the API, as the 1 h point of that hour must read. */
interface HourFromMinutes {
  ts: string;
  mean: number;
  min: number;
  max: number;
  count: number;
  last: number;
  quality: number;
}

describe('history from rollup_1h for long windows', () => {
  let h: TestApp;
  let agent: Awaited<ReturnType<TestApp['agent']>>;
  let f: Awaited<ReturnType<typeof fixture>>;
  beforeAll(async () => {
    h = await createTestApp();
    agent = await h.agent('analyst');
    f = await fixture(h);
  });
  afterAll(async () => h.close());
  const samples = (query: Record<string, string | number>, tag = f.mlss) => agent.get(`/api/v1/plants/${f.plant}/tags/${tag}/samples`).query(query);
  const hoursFromMinutes = async (lo: number, hi: number): Promise<HourFromMinutes[]> =>
    (
      await h.ctx.db.pool.query(
        `SELECT to_char(date_trunc('hour', bucket) AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.MS"Z"') AS ts, sum(sum) / sum(count) AS mean, min(min) AS min, max(max) AS max,
                sum(count)::int AS count, (array_agg(last ORDER BY last_ts DESC))[1] AS last, (bit_or(quality & ~3) | max(quality & 3))::int AS quality
         FROM rollup_1m WHERE tag_id = $1 AND bucket >= $2 AND bucket < $3 GROUP BY 1 ORDER BY 1`,
        [f.mlss, new Date(lo), new Date(hi)],
      )
    ).rows;
  const decoded = (code: number) => (qualityFlags(code).length ? { quality: qualityGrade(code), flags: qualityFlags(code) } : { quality: qualityGrade(code) });

  it('a 30-day window: 1 h buckets from rollup_1h, window widened to whole hours, each equal to its hour of minute rollups', async () => {
    // Neither end on an hour: the answer starts at the hour holding `from` and ends after the hour holding `to`.
    const from = T0 - 30 * D + 17 * MIN + 250;
    const to = T0 - 7 * MIN;
    const r = await samples({ from: iso(from), to: iso(to) });
    expect(r.status).toBe(200);
    expect(r.headers['x-resolution']).toBe('1h');
    const body = samplesResponse.parse(r.body);
    const lo = T0 - 30 * D;
    const hi = T0;
    expect(body).toMatchObject({ resolution: '1h', step_s: 3600, agg: 'mean', from: iso(lo), to: iso(hi), nextCursor: null });
    const expected = await hoursFromMinutes(lo, hi);
    // 720 hours less the 3 of the gap.
    expect(expected).toHaveLength(717);
    expect(body.points).toHaveLength(717);
    expect(body.points[0]!.ts).toBe(iso(lo));
    expect(body.points.at(-1)!.ts).toBe(iso(hi - H));
    body.points.forEach((p, i) => {
      const e = expected[i]!;
      expect(p.ts).toBe(e.ts);
      expect(p.value).toBeCloseTo(e.mean, 12);
      expect({ min: p.min, max: p.max, count: p.count, quality: p.quality, flags: p.flags }).toEqual({ min: e.min, max: e.max, count: e.count, ...decoded(e.quality) });
    });
    // The gap stays a gap; the partial hour counts its 20 minutes only.
    expect(body.points.filter((p) => Date.parse(p.ts) >= f.gapLo && Date.parse(p.ts) < f.gapLo + 3 * H)).toEqual([]);
    const part = body.points.find((p) => p.ts === iso(f.partial))!;
    expect(part.count).toBe(expected.find((e) => e.ts === iso(f.partial))!.count);
    expect(part.count).toBeLessThanOrEqual(20 * 60);
    // Flagged minutes show in their hour: grade and flags as the minute rollups carry them.
    expect(body.points.some((p) => p.quality === 'uncertain' && p.flags?.includes('sourceStatus'))).toBe(true);
    expect(body.points.some((p) => p.flags?.includes('outOfRange'))).toBe(true);

    for (const agg of ['last', 'min', 'max'] as const) {
      const a = samplesResponse.parse((await samples({ from: iso(from), to: iso(to), agg })).body);
      expect(a.resolution).toBe('1h');
      expect(a.points.map((p) => p.value)).toEqual(expected.map((e) => e[agg]));
    }
  });

  it('the minute path at the same step gives the same buckets (the repository, both tables)', async () => {
    const repo = seriesRepository(h.ctx.db.pool);
    const lo = new Date(T0 - 30 * D);
    const hi = new Date(T0);
    for (const withLast of [false, true]) {
      const fromHours = await repo.buckets('1h', f.mlss, lo, hi, 3600, 5000, withLast);
      const fromMinutes = await repo.buckets('1m', f.mlss, lo, hi, 3600, 5000, withLast);
      expect(fromHours).toHaveLength(717);
      // [ts, ts_ms, mean, min, max, count, last, quality]: all exact but the mean (sums added in another order).
      expect(fromHours.map(([ts, ms, , min, max, count, last, q]) => [ts, ms, min, max, count, last, q])).toEqual(fromMinutes.map(([ts, ms, , min, max, count, last, q]) => [ts, ms, min, max, count, last, q]));
      fromHours.forEach((row, i) => expect(row[2]).toBeCloseTo(fromMinutes[i]![2], 12));
    }
  });

  it('the packed bucket answer holds the same doubles as a plain row query (every table, with and without last)', async () => {
    // PostgreSQL ≥ 12 prints float8 as the shortest text that reads back to the same double
    // (extra_float_digits = 1, the default; PostgreSQL documentation, "Floating-Point Types"), so
    // the rows below parse to the computed doubles and the packed form must equal them exactly.
    const repo = seriesRepository(h.ctx.db.pool);
    const cases = [
      { source: '1h' as const, table: 'rollup_1h', tag: f.mlss, lo: T0 - 30 * D, hi: T0, step: 21_600 },
      { source: '1m' as const, table: 'rollup_1m', tag: f.mlss, lo: T0 - 2 * D, hi: T0, step: 3600 },
    ];
    for (const c of cases) {
      for (const withLast of [false, true]) {
        const got = await repo.buckets(c.source, c.tag, new Date(c.lo), new Date(c.hi), c.step, 5000, withLast);
        const plain = await h.ctx.db.pool.query(
          `SELECT (extract(epoch FROM date_bin(make_interval(secs => $4::float8), bucket, timestamptz 'epoch')) * 1000)::float8 AS ms,
                  sum(sum) / sum(count) AS mean, min(min) AS min, max(max) AS max, sum(count)::float8 AS count,
                  (array_agg(last ORDER BY last_ts DESC))[1] AS last, (bit_or(quality & ~3) | max(quality & 3))::int AS quality
           FROM ${c.table} WHERE tag_id = $1 AND bucket >= $2 AND bucket < $3 GROUP BY 1 ORDER BY 1`,
          [c.tag, new Date(c.lo), new Date(c.hi), c.step],
        );
        expect(got.length).toBeGreaterThan(40);
        expect(got).toEqual(plain.rows.map((r) => [iso(r.ms), r.ms, r.mean, r.min, r.max, r.count, withLast ? r.last : null, r.quality]));
      }
    }
    // Raw samples bucketed by the minute (the packed form's third table); the codes tag has NULL and Bad samples, left out.
    const raw = await repo.buckets('raw', f.codes, new Date(T0 - H), new Date(T0), 60, 5000, true);
    const plainRaw = await h.ctx.db.pool.query(
      `SELECT count(*)::float8 AS count, min(value) AS min, max(value) AS max FROM samples WHERE tag_id = $1 AND value IS NOT NULL AND (quality & 3) < 2`,
      [f.codes],
    );
    expect(raw).toHaveLength(3);
    expect(raw.reduce((n, r) => n + r[5], 0)).toBe(plainRaw.rows[0].count);
    expect(Math.min(...raw.map((r) => r[3]))).toBe(plainRaw.rows[0].min);
    expect(Math.max(...raw.map((r) => r[4]))).toBe(plainRaw.rows[0].max);
  });

  it('pages of a 1 h answer join to the whole answer', async () => {
    const q = { from: iso(T0 - 30 * D), to: iso(T0) };
    const whole = samplesResponse.parse((await samples(q)).body).points;
    const got: SamplePoint[] = [];
    let r = await samples({ ...q, limit: 300 });
    for (;;) {
      const body = samplesResponse.parse(r.body);
      got.push(...body.points);
      if (!body.nextCursor) break;
      expect(body.points).toHaveLength(300);
      r = await samples({ cursor: body.nextCursor, limit: 300 });
    }
    expect(got).toEqual(whole);
  });

  it('every quality code reads as the contract decodes it (grade, flags only when any), null values kept', async () => {
    const r = samplesResponse.parse((await samples({ from: iso(T0 - H), to: iso(T0 - H + 128_000) }, f.codes)).body);
    expect(r.resolution).toBe('raw');
    expect(r.points).toHaveLength(128);
    r.points.forEach((p, c) => {
      expect(p).toEqual({ ts: iso(T0 - H + c * 1000), value: c % 4 === 2 ? null : c / 8, ...decoded(c) });
      expect('flags' in p).toBe(qualityFlags(c).length > 0);
    });
  });
});
