import type { AddressInfo } from 'node:net';
import type { Server } from 'node:http';
import express from 'express';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { alarmsResponse, balanceHistoryResponse, balanceLiveResponse, plantLayoutOut, samplesResponse, tagsResponse, type SamplePoint } from '../../shared/contracts/plant-api.ts';
import { createApp } from '../../server/app.ts';
import { errorMiddleware } from '../../server/http/error-middleware.ts';
import { rateLimit } from '../../server/http/rate-limit.ts';
import { parseCsv } from '../../server/services/csv.service.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';

const T0 = Date.parse('2025-06-02T12:00:00Z');
const H = 3_600_000;
const D = 24 * H;
const iso = (ms: number) => new Date(ms).toISOString();
/** Raw value of second i of the raw hour (not round, so CSV must carry every digit). */
const rawValue = (i: number) => 10 + (i % 37) * 0.25 + i / 1000 + 1 / 3;

/** A plant with one train, a tag with 1 h of 1 s raw samples and its rollups, 3 days of rollup_1m (with a 1 h gap) and a year of rollup_1h. */
async function fixture(h: TestApp) {
  const q = (text: string, values: unknown[] = []) => h.ctx.db.pool.query(text, values);
  const plant = async (code: string) => (await q(`INSERT INTO plants (code, name, peak_flow_m3h) VALUES ($1, $2, 4200) RETURNING id`, [code, `Plant ${code}`])).rows[0].id as number;
  const a = await plant('alder');
  const b = await plant('birch');
  const train = (await q(`INSERT INTO trains (plant_id, code, name) VALUES ($1, 't1', 'Train 1') RETURNING id`, [a])).rows[0].id;
  const basin = (await q(`WITH u AS (INSERT INTO basins (train_id, code, name) VALUES ($1, 'ab1', 'Aeration 1') RETURNING id) INSERT INTO basin_versions (basin_id, effective_from, volume_m3, aerated_fraction) SELECT id, now(), 6000, 1 FROM u RETURNING basin_id AS id`, [train])).rows[0].id;
  await q(`WITH u AS (INSERT INTO clarifiers (train_id, code, name) VALUES ($1, 'fc1', 'Final 1') RETURNING id) INSERT INTO clarifier_versions (clarifier_id, effective_from, area_m2, side_water_depth_m, count) SELECT id, now(), 700, 4.5, 2 FROM u`, [train]);
  await q(`WITH u AS (INSERT INTO pumps (train_id, code, name, kind) VALUES ($1, 'ras1', 'RAS 1', 'ras') RETURNING id) INSERT INTO pump_versions (pump_id, effective_from, capacity_m3h) SELECT id, now(), 900 FROM u`, [train]);
  const src = (await q(`INSERT INTO sources (plant_id, name, kind, url) VALUES ($1, 'alder-mqtt', 'mqtt', 'mqtt://127.0.0.1:1') RETURNING id`, [a])).rows[0].id;
  const srcB = (await q(`INSERT INTO sources (plant_id, name, kind, url) VALUES ($1, 'birch-opc', 'opcua', 'opc.tcp://127.0.0.1:1') RETURNING id`, [b])).rows[0].id;
  const tag = (await q(`INSERT INTO tags (plant_id, source_id, name, address, unit, expected_period_s) VALUES ($1, $2, 'AB1_MLSS', 'alder/ab1/mlss', 'g/L', 1) RETURNING id`, [a, src])).rows[0].id as number;
  const quiet = (await q(`INSERT INTO tags (plant_id, source_id, name, address, unit, expected_period_s) VALUES ($1, $2, 'FC1_BLANKET', 'alder/fc1/blanket', 'm', 10) RETURNING id`, [a, src])).rows[0].id as number;
  const tagB = (await q(`INSERT INTO tags (plant_id, source_id, name, address, unit) VALUES ($1, $2, 'B_FLOW', 'ns=2;s=Flow', 'm3/h') RETURNING id`, [b, srcB])).rows[0].id as number;
  await q(`INSERT INTO signal_map (plant_id, signal, target_type, target_id, tag_id) VALUES ($1, 'basin.mlss', 'basin', $2, $3)`, [a, basin, tag]);
  // Raw hour [T0−1h, T0): every 500th sample uncertain from the source, sample 1234 bad with value 0.
  await q(
    `INSERT INTO samples (tag_id, ts, value, quality)
     SELECT $1, to_timestamp($2::float8 / 1000 + i), CASE WHEN i = 1234 THEN 0 ELSE 10 + (i % 37) * 0.25 + i / 1000.0 + 1 / 3.0 END,
            CASE WHEN i = 1234 THEN 2 WHEN i % 500 = 0 THEN 5 ELSE 0 END
     FROM generate_series(0, 3599) i`,
    [tag, T0 - H],
  );
  // Rollups of that hour as ingest computes them: no bad or null samples.
  for (const [table, unit] of [['rollup_1m', 'minute'], ['rollup_1h', 'hour']]) {
    await q(
      `INSERT INTO ${table} (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
       SELECT tag_id, date_trunc('${unit}', ts), min(value), max(value), sum(value), count(*), (array_agg(value ORDER BY ts DESC))[1], max(ts), (bit_or(quality & ~3) | max(quality & 3))
       FROM samples WHERE tag_id = $1 AND value IS NOT NULL AND (quality & 3) < 2 GROUP BY 1, 2`,
      [tag],
    );
  }
  // rollup_1m for the 3 days before the raw hour, with no rows in [T0−2d, T0−2d+1h).
  await q(
    `INSERT INTO rollup_1m (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
     SELECT $1, b, v - 1, v + 1, v * 60, 60, v + 0.5, b + interval '59 s', 0
     FROM (SELECT b, 20 + (extract(epoch FROM b)::bigint / 60 % 60) / 10.0 AS v
           FROM generate_series(to_timestamp($2::float8 / 1000), to_timestamp($3::float8 / 1000) - interval '1 minute', interval '1 minute') b) x
     WHERE NOT (b >= to_timestamp($4::float8 / 1000) AND b < to_timestamp($4::float8 / 1000) + interval '1 hour')`,
    [tag, T0 - 3 * D - H, T0 - H, T0 - 2 * D],
  );
  // A year of rollup_1h before the raw hour.
  await q(
    `INSERT INTO rollup_1h (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
     SELECT $1, b, v - 2, v + 2, v * 3600, 3600, v, b + interval '3599 s', 0
     FROM (SELECT b, 3 + (extract(epoch FROM b)::bigint / 3600 % 24) / 8.0 AS v
           FROM generate_series(to_timestamp($2::float8 / 1000), to_timestamp($3::float8 / 1000) - interval '1 hour', interval '1 hour') b) x`,
    [tag, T0 - 365 * D, T0 - H],
  );
  await q(`INSERT INTO tag_latest (tag_id, ts, value, quality) VALUES ($1, now() - interval '2 seconds', 3.25, 5), ($2, now() - interval '1 hour', 1.5, 0)`, [tag, quiet]);
  return { a, b, tag, quiet, tagB };
}

function csvRows(text: string): { header: string[]; rows: string[][] } {
  const p = parseCsv(text);
  if (!p.ok) throw new Error(`CSV: line ${p.line} ${p.message}`);
  const [header, ...rows] = p.records;
  return { header: header!.fields, rows: rows.map((r) => r.fields) };
}

describe('read API', () => {
  let h: TestApp;
  let agent: Awaited<ReturnType<TestApp['agent']>>;
  let f: Awaited<ReturnType<typeof fixture>>;
  beforeAll(async () => {
    h = await createTestApp();
    agent = await h.agent('analyst');
    f = await fixture(h);
  });
  afterAll(async () => h.close());
  const samples = (query: Record<string, string | number>, tag = f.tag, plant = f.a) => agent.get(`/api/v1/plants/${plant}/tags/${tag}/samples`).query(query);

  it('plants and layout: trains with basins, clarifiers, pumps and peak flow; 404 for an unknown plant, 422 for a bad id', async () => {
    const list = await agent.get('/api/v1/plants');
    expect(list.status).toBe(200);
    expect(list.body.map((p: { code: string }) => p.code)).toEqual(['alder', 'birch']);
    const one = await agent.get(`/api/v1/plants/${f.a}`);
    expect(one.status).toBe(200);
    const layout = plantLayoutOut.parse(one.body);
    expect(layout.peakFlow_m3h).toBe(4200);
    expect(layout.trains[0]!.basins[0]).toMatchObject({ code: 'ab1', volume_m3: 6000 });
    expect(layout.trains[0]!.clarifiers[0]).toMatchObject({ code: 'fc1', area_m2: 700, count: 2 });
    expect(layout.trains[0]!.pumps[0]).toMatchObject({ code: 'ras1', kind: 'ras', capacity_m3h: 900 });
    expect((await agent.get('/api/v1/plants/999999')).status).toBe(404);
    const bad = await agent.get('/api/v1/plants/-3');
    expect(bad.status).toBe(422);
    expect(bad.body.error.fields).toHaveProperty('plantId');
    expect((await agent.get('/api/v1/plants/1.5/tags')).status).toBe(422);
  });

  it('live tags: value, decoded quality, age, staleness, source kind and signal mapping', async () => {
    const r = await agent.get(`/api/v1/plants/${f.a}/tags`);
    expect(r.status).toBe(200);
    const body = tagsResponse.parse(r.body);
    const mlss = body.tags.find((t) => t.id === f.tag)!;
    expect(mlss).toMatchObject({ unit: 'g/L', value: 3.25, source: { kind: 'mqtt', name: 'alder-mqtt' }, stale: false });
    expect(mlss.quality).toEqual({ code: 5, grade: 'uncertain', flags: ['sourceStatus'] });
    expect(mlss.age_s).toBeGreaterThan(1);
    expect(mlss.signals).toEqual([{ signal: 'basin.mlss', targetType: 'basin', targetId: expect.any(Number), targetCode: 'ab1' }]);
    const blanket = body.tags.find((t) => t.id === f.quiet)!;
    expect(blanket.stale).toBe(true); // one hour old with a 10 s period
    expect(body.tags.some((t) => t.id === f.tagB)).toBe(false);
  });

  it('resolution: raw for an hour, rollup_1m for a few days, rollup_1h for a year — each ≤ ~2000 points', async () => {
    const half = await samples({ from: iso(T0 - H), to: iso(T0 - H / 2) });
    expect(half.status).toBe(200);
    const hb = samplesResponse.parse(half.body);
    expect(hb).toMatchObject({ resolution: 'raw', step_s: null, agg: 'mean', unit: 'g/L' });
    expect(hb.points).toHaveLength(1800);
    expect(hb.points[7]).toEqual({ ts: iso(T0 - H + 7000), value: rawValue(7), quality: 'good' });
    expect(hb.points[1234]).toEqual({ ts: iso(T0 - H + 1234_000), value: 0, quality: 'bad' });
    expect(hb.points[500]).toMatchObject({ quality: 'uncertain', flags: ['sourceStatus'] });

    const hour = samplesResponse.parse((await samples({ from: iso(T0 - H), to: iso(T0) })).body);
    expect(hour.resolution).toBe('raw');
    expect(hour.step_s).toBe(2); // 3600 samples > 2000: buckets of 2 s
    expect(hour.points).toHaveLength(1800);
    // The bucket holding the bad sample aggregates only its good neighbour.
    expect(hour.points[617]).toMatchObject({ ts: iso(T0 - H + 1234_000), count: 1, value: rawValue(1235), quality: 'good' });
    expect(hour.points[3]!.value).toBeCloseTo((rawValue(6) + rawValue(7)) / 2, 12);

    const days = samplesResponse.parse((await samples({ from: iso(T0 - 3 * D), to: iso(T0) })).body);
    expect(days).toMatchObject({ resolution: '1m', step_s: 180 });
    expect(days.points.length).toBeLessThanOrEqual(2000);
    expect(days.points.length).toBeGreaterThan(1400);
    const yr = samplesResponse.parse((await samples({ from: iso(T0 - 365 * D), to: iso(T0) })).body);
    expect(yr).toMatchObject({ resolution: '1h', step_s: 21_600 });
    expect(yr.points.length).toBeLessThanOrEqual(2000);
    expect(yr.points.length).toBeGreaterThan(1400);
    // A 6 h bucket of the year: mean of the six hourly means (all counts equal), min/max over them.
    const p = yr.points[10]!;
    expect(new Date(p.ts).getUTCHours() % 6).toBe(0); // the buckets tile the UTC day
    const hours = [0, 1, 2, 3, 4, 5].map((k) => 3 + (((Date.parse(p.ts) / H + k) % 24) / 8));
    expect(p.value).toBeCloseTo(hours.reduce((s, v) => s + v, 0) / 6, 12);
    expect(p.min).toBeCloseTo(Math.min(...hours) - 2, 12);
    expect(p.max).toBeCloseTo(Math.max(...hours) + 2, 12);
    expect(p.count).toBe(6 * 3600);
    expect(yr.from).toBe(iso(Math.floor((T0 - 365 * D) / 21_600_000) * 21_600_000));
  });

  it('step rounds up to what the resolution allows; agg picks min, max or last; rollup_1m means equal the raw means', async () => {
    const r = samplesResponse.parse((await samples({ from: iso(T0 - H), to: iso(T0), step: 90, agg: 'max' })).body);
    expect(r).toMatchObject({ resolution: '1m', step_s: 120, agg: 'max' });
    expect(r.points).toHaveLength(30);
    const mean = samplesResponse.parse((await samples({ from: iso(T0 - H), to: iso(T0), step: 60 })).body);
    expect(mean.points).toHaveLength(60);
    for (const m of [0, 20, 59]) {
      const vals = Array.from({ length: 60 }, (_, k) => m * 60 + k).filter((i) => i !== 1234).map(rawValue);
      expect(mean.points[m]!.value).toBeCloseTo(vals.reduce((s, v) => s + v, 0) / vals.length, 9);
      expect(mean.points[m]!.count).toBe(vals.length);
    }
    const last = samplesResponse.parse((await samples({ from: iso(T0 - H), to: iso(T0), step: 60, agg: 'last' })).body);
    expect(last.points[5]!.value).toBe(rawValue(5 * 60 + 59));
    const min = samplesResponse.parse((await samples({ from: iso(T0 - H), to: iso(T0), step: 3600, agg: 'min' })).body);
    expect(min).toMatchObject({ resolution: '1h', step_s: 3600 });
    expect(min.points[0]!.value).toBe(Math.min(...Array.from({ length: 3600 }, (_, i) => i).filter((i) => i !== 1234).map(rawValue)));
    const raw = samplesResponse.parse((await samples({ from: iso(T0 - H), to: iso(T0), step: 1 })).body);
    expect(raw).toMatchObject({ resolution: 'raw', step_s: 2 }); // 1 s asked, raised to keep ≤ 2000 points
  });

  it('gaps stay gaps: no point inside an hour without rollups', async () => {
    const r = samplesResponse.parse((await samples({ from: iso(T0 - 3 * D), to: iso(T0) })).body);
    const gapLo = T0 - 2 * D;
    const inGap = r.points.filter((p) => Date.parse(p.ts) >= gapLo && Date.parse(p.ts) < gapLo + H);
    expect(inGap).toEqual([]);
    const around = r.points.filter((p) => Date.parse(p.ts) >= gapLo - H && Date.parse(p.ts) < gapLo + 2 * H);
    expect(around).toHaveLength(40); // 20 buckets of 180 s on each side
    expect(around.every((p) => p.value !== null && p.count === 180)).toBe(true);
  });

  it('invalid history queries are 422 with the field named; unknown tag or other plant’s tag is 404', async () => {
    for (const [query, field] of [
      [{ from: 'yesterday' }, 'from'],
      [{ agg: 'median' }, 'agg'],
      [{ step: 0 }, 'step'],
      [{ from: iso(T0), to: iso(T0 - H) }, 'to'],
      [{ limit: 0 }, 'limit'],
      [{ bogus: 1 }, '_'],
    ] as const) {
      const r = await samples(query as Record<string, string | number>);
      expect(r.status, JSON.stringify(query)).toBe(422);
      expect(Object.keys(r.body.error.fields), JSON.stringify(query)).toContain(field);
    }
    expect((await samples({}, 999999)).status).toBe(404);
    expect((await samples({}, f.tagB)).status).toBe(404);
  });

  it('CSV export carries exactly the numbers of the JSON answer (RFC 4180, header row, ISO timestamps)', async () => {
    const q = { from: iso(T0 - H), to: iso(T0) };
    const json = samplesResponse.parse((await samples(q)).body);
    const csv = await samples({ ...q, format: 'csv' });
    expect(csv.status).toBe(200);
    expect(csv.headers['content-type']).toMatch(/^text\/csv/);
    expect(csv.text.endsWith('\r\n')).toBe(true);
    const { header, rows } = csvRows(csv.text);
    // Value columns carry the unit in the header (in the plant's unit system).
    expect(header!.map((c) => c.replace(/ \[[^\]]+\]$/, ''))).toEqual(['ts', 'value', 'min', 'max', 'count', 'quality', 'flags']);
    expect(rows).toHaveLength(json.points.length);
    rows.forEach((r, i) => {
      const p = json.points[i] as SamplePoint;
      expect(r[0]).toBe(p.ts);
      expect(Number(r[1])).toBe(p.value);
      expect(Number(r[2])).toBe(p.min);
      expect(Number(r[3])).toBe(p.max);
      expect(Number(r[4])).toBe(p.count);
      expect(r[5]).toBe(p.quality);
    });
    const viaAccept = await agent.get(`/api/v1/plants/${f.a}/tags/${f.tag}/samples`).query(q).set('Accept', 'text/csv');
    expect(viaAccept.text).toBe(csv.text);
    const raw = await samples({ from: iso(T0 - H), to: iso(T0 - H / 2), format: 'csv' });
    const rr = csvRows(raw.text).rows;
    expect(Number(rr[7]![1])).toBe(rawValue(7));
    expect(rr[500]![6]).toBe('sourceStatus');
  });

  it('cursor pagination: pages join to the whole answer, Link and X-Next-Cursor name the next page', async () => {
    const q = { from: iso(T0 - H), to: iso(T0 - H / 2) };
    const whole = samplesResponse.parse((await samples(q)).body).points;
    const got: SamplePoint[] = [];
    let url: string | null = `/api/v1/plants/${f.a}/tags/${f.tag}/samples?from=${encodeURIComponent(q.from)}&to=${encodeURIComponent(q.to)}&limit=700`;
    let pages = 0;
    while (url) {
      const r = await agent.get(url);
      expect(r.status).toBe(200);
      got.push(...r.body.points);
      pages++;
      if (r.body.nextCursor) {
        expect(r.headers['x-next-cursor']).toBe(r.body.nextCursor);
        const link = /^<([^>]+)>; rel="next"$/.exec(String(r.headers.link));
        expect(link).not.toBeNull();
        url = link![1]!;
      } else {
        expect(r.headers.link).toBeUndefined();
        url = null;
      }
    }
    expect(pages).toBe(3);
    expect(got).toEqual(whole);
    // Bucketed pages too, and in CSV.
    const bq = { from: iso(T0 - 3 * D), to: iso(T0) };
    const bWhole = samplesResponse.parse((await samples(bq)).body).points;
    const p1 = await samples({ ...bq, limit: 1000, format: 'csv' });
    const next = p1.headers['x-next-cursor'];
    expect(next).toBeTruthy();
    const p2 = await samples({ cursor: next!, limit: 1000, format: 'csv' });
    const csvTs = [...csvRows(p1.text).rows, ...csvRows(p2.text).rows].map((r) => r[0]);
    expect(csvTs).toEqual(bWhole.map((p) => p.ts));
    expect(p2.headers['x-next-cursor']).toBeUndefined();
    // A cursor of another tag, a forged one, or one used with a different window is refused.
    expect((await samples({ cursor: next! }, f.quiet)).status).toBe(400);
    expect((await samples({ cursor: 'not-a-cursor' })).status).toBe(400);
    expect((await samples({ cursor: next!, from: iso(T0 - D) })).status).toBe(400);
  });

  it('a token scoped to one plant cannot read another (403) and lists only its own', async () => {
    const made = await agent.post('/api/v1/tokens').send({ name: 'alder only', role: 'analyst', expiresInDays: 1, plantIds: [f.a] });
    expect(made.status).toBe(201);
    const tok = (path: string) => request(h.app).get(`/api/v1${path}`).set('Authorization', `Bearer ${made.body.token}`);
    expect((await tok(`/plants/${f.a}/tags`)).status).toBe(200);
    for (const path of [`/plants/${f.b}`, `/plants/${f.b}/tags`, `/plants/${f.b}/tags/${f.tagB}/samples`, `/plants/${f.b}/balance/live`, `/plants/${f.b}/balance/history`, `/plants/${f.b}/alarms`, `/plants/${f.b}/lab-results`, `/plants/${f.b}/stream`]) {
      const r = await tok(path);
      expect(r.status, path).toBe(403);
    }
    // Out of scope is 403 even for a plant that does not exist: scopes do not reveal plants.
    expect((await tok('/plants/999999')).status).toBe(403);
    const list = await tok('/plants');
    expect(list.body.map((p: { id: number }) => p.id)).toEqual([f.a]);
  });

  it('balance live: null with a reason before the first computation, then the latest row', async () => {
    const none = await agent.get(`/api/v1/plants/${f.b}/balance/live`);
    expect(none.status).toBe(200);
    expect(balanceLiveResponse.parse(none.body)).toMatchObject({ balance: null, age_s: null, reason: expect.stringMatching(/no balance/) });
    await h.ctx.db.pool.query(
      `INSERT INTO balances (plant_id, ts, quality, data, inputs) VALUES ($1, now() - interval '20 s', 'good', '{"inventory_kg": 1}', '{}'), ($1, now() - interval '5 s', 'estimated', '{"inventory_kg": 2, "reasons": ["MLSS stale"]}', '{"mlss": "stale"}')`,
      [f.b],
    );
    const live = balanceLiveResponse.parse((await agent.get(`/api/v1/plants/${f.b}/balance/live`)).body);
    expect(live.balance).toMatchObject({ quality: 'estimated', data: { inventory_kg: 2 }, inputs: { mlss: 'stale' } });
    expect(live.age_s).toBeGreaterThanOrEqual(4);
  });

  it('balance history: buckets by step with the last computation, count and worst quality; CSV flattens data', async () => {
    // 60 computations every 10 s from T0; one 'unavailable' in the second minute.
    await h.ctx.db.pool.query(
      `INSERT INTO balances (plant_id, ts, quality, data, inputs)
       SELECT $1, to_timestamp($2::float8 / 1000) + i * interval '10 s', CASE WHEN i = 8 THEN 'unavailable' ELSE 'good' END,
              jsonb_build_object('inventory_kg', 1000 + i * 1.5, 'margin', jsonb_build_object('ras', 0.25 + i / 1000.0)), '{}'
       FROM generate_series(0, 59) i`,
      [f.a, T0],
    );
    const r = await agent.get(`/api/v1/plants/${f.a}/balance/history`).query({ from: iso(T0), to: iso(T0 + 10 * 60_000), step: 60 });
    expect(r.status).toBe(200);
    const body = balanceHistoryResponse.parse(r.body);
    expect(body.step_s).toBe(60);
    expect(body.rows).toHaveLength(10);
    expect(body.rows[1]).toMatchObject({ bucket: iso(T0 + 60_000), ts: iso(T0 + 110_000), computations: 6, worstQuality: 'unavailable', quality: 'good', data: { inventory_kg: 1000 + 11 * 1.5 } });
    const wide = balanceHistoryResponse.parse((await agent.get(`/api/v1/plants/${f.a}/balance/history`).query({ from: iso(T0 - 30 * D), to: iso(T0 + D) })).body);
    expect(wide.step_s).toBe(Math.ceil((31 * D) / 1000 / 2000));
    const csv = await agent.get(`/api/v1/plants/${f.a}/balance/history`).query({ from: iso(T0), to: iso(T0 + 10 * 60_000), step: 60, format: 'csv' });
    const { header: withUnits, rows } = csvRows(csv.text);
    // Columns with an SI suffix carry their display unit in the header (`data.inventory_kg [kg]`).
    expect(withUnits).toContain('data.inventory_kg [kg]');
    const header = withUnits.map((c) => c.replace(/ \[[^\]]+\]$/, ''));
    expect(header).toEqual(expect.arrayContaining(['bucket', 'ts', 'computations', 'data.inventory_kg', 'data.margin.ras']));
    expect(Number(rows[3]![header.indexOf('data.margin.ras')])).toBe(body.rows[3]!.data.margin && (body.rows[3]!.data.margin as { ras: number }).ras);
    const paged = await agent.get(`/api/v1/plants/${f.a}/balance/history`).query({ from: iso(T0), to: iso(T0 + 10 * 60_000), step: 60, limit: 4 });
    expect(paged.body.rows).toHaveLength(4);
    const rest = await agent.get(`/api/v1/plants/${f.a}/balance/history`).query({ cursor: paged.body.nextCursor, limit: 10 });
    expect([...paged.body.rows, ...rest.body.rows]).toEqual(body.rows);
  });

  it('alarms: filter by state and time, newest first, paged; CSV quotes commas, quotes and line breaks', async () => {
    await h.ctx.db.pool.query(
      `INSERT INTO alarms (plant_id, rule, target, priority, state, message, value, "limit", raised_at, cleared_at) VALUES
        ($1, 'blanket-high', 'fc1', 2, 'raised', 'Blanket 1.8 m, "high", rising', 1.8, 1.5, to_timestamp($2::float8 / 1000), null),
        ($1, 'ras-margin', 't1', 1, 'cleared', E'RAS margin low,\\nrecovered', 0.05, 0.1, to_timestamp($2::float8 / 1000) - interval '1 h', to_timestamp($2::float8 / 1000)),
        ($1, 'mlss-low', 'ab1', 3, 'raised', 'MLSS low', 1.9, 2, to_timestamp($2::float8 / 1000) - interval '2 h', null),
        ($3, 'other-plant', '', 3, 'raised', 'not yours', null, null, to_timestamp($2::float8 / 1000), null)`,
      [f.a, T0, f.b],
    );
    const all = alarmsResponse.parse((await agent.get(`/api/v1/plants/${f.a}/alarms`)).body);
    expect(all.alarms.map((a) => a.rule)).toEqual(['blanket-high', 'ras-margin', 'mlss-low']);
    const raised = alarmsResponse.parse((await agent.get(`/api/v1/plants/${f.a}/alarms`).query({ state: 'raised' })).body);
    expect(raised.alarms.map((a) => a.rule)).toEqual(['blanket-high', 'mlss-low']);
    const window = alarmsResponse.parse((await agent.get(`/api/v1/plants/${f.a}/alarms`).query({ from: iso(T0 - 90 * 60_000), to: iso(T0) })).body);
    expect(window.alarms.map((a) => a.rule)).toEqual(['ras-margin']);
    const p1 = await agent.get(`/api/v1/plants/${f.a}/alarms`).query({ limit: 2 });
    expect(p1.body.alarms).toHaveLength(2);
    const p2 = await agent.get(`/api/v1/plants/${f.a}/alarms`).query({ limit: 2, cursor: p1.body.nextCursor });
    expect(p2.body.alarms.map((a: { rule: string }) => a.rule)).toEqual(['mlss-low']);
    expect(p2.body.nextCursor).toBeNull();
    // Another API process of the same deployment (same session secret, a composition of its own)
    // reads the first one's cursor: a load balancer may send the next page anywhere.
    const other = request.agent(createApp({ ...h.ctx }, { serveMonitor: false })).set('Sec-Fetch-Site', 'same-origin');
    await other.post('/api/v1/auth/login').send({ email: h.users.analyst.email, password: h.users.analyst.password }).expect(200);
    const p2b = await other.get(`/api/v1/plants/${f.a}/alarms`).query({ limit: 2, cursor: p1.body.nextCursor });
    expect(p2b.status).toBe(200);
    expect(p2b.body.alarms.map((a: { rule: string }) => a.rule)).toEqual(['mlss-low']);
    const csv = await agent.get(`/api/v1/plants/${f.a}/alarms`).set('Accept', 'text/csv');
    expect(csv.text).toContain('"Blanket 1.8 m, ""high"", rising"');
    const { header, rows } = csvRows(csv.text);
    expect(rows.map((r) => r[header.indexOf('message')])).toEqual(all.alarms.map((a) => a.message));
    expect(rows.map((r) => Number(r[header.indexOf('value')]))).toEqual(all.alarms.map((a) => a.value));
    expect(rows[1]![header.indexOf('clearedAt')]).toBe(iso(T0));
  });

  it('OpenAPI documents the read routes with their query parameters', async () => {
    const doc = (await agent.get('/api/v1/openapi.json')).body;
    const op = doc.paths['/api/v1/plants/{plantId}/tags/{tagId}/samples'].get;
    expect(op.parameters.map((p: { name: string }) => p.name)).toEqual(expect.arrayContaining(['plantId', 'tagId', 'from', 'to', 'step', 'agg', 'cursor', 'limit', 'format']));
    expect(op.responses['200'].content).toHaveProperty('text/csv');
    expect(doc.paths['/api/v1/plants/{plantId}/stream'].get.responses['200'].content).toHaveProperty('text/event-stream');
  });
});

describe('per-token rate limit', () => {
  it('token bucket: burst, then 429 with Retry-After until the bucket refills; sessions are not limited', async () => {
    let now = 0;
    const app = express();
    app.use((req, _res, next) => {
      const id = Number(req.headers['x-token'] ?? 0);
      if (id) req.principal = { userId: 1, email: 'a@b.invalid', role: 'analyst', tokenId: id, plantIds: null };
      else req.principal = { userId: 1, email: 'a@b.invalid', role: 'analyst', tokenId: null, plantIds: null };
      next();
    });
    app.use(rateLimit({ ratePerSec: 20, burst: 100, now: () => now }));
    app.get('/x', (_req, res) => res.json({ ok: true }));
    app.use(errorMiddleware((await import('pino')).default({ level: 'silent' })));
    const server: Server = await new Promise((r) => {
      const s = app.listen(0, '127.0.0.1', () => r(s));
    });
    try {
      const base = `http://127.0.0.1:${(server.address() as AddressInfo).port}/x`;
      const hit = (token: number) => fetch(base, { headers: token ? { 'x-token': String(token) } : {} });
      for (let i = 0; i < 100; i++) expect((await hit(7)).status).toBe(200);
      const limited = await hit(7);
      expect(limited.status).toBe(429);
      expect(Number(limited.headers.get('retry-after'))).toBe(1);
      expect((await limited.json()).error.code).toBe('too_many_requests');
      expect((await hit(8)).status).toBe(200); // another token has its own bucket
      expect((await hit(0)).status).toBe(200); // a session is not limited
      now += 100; // 0.1 s refills 2 requests
      expect((await hit(7)).status).toBe(200);
      expect((await hit(7)).status).toBe(200);
      expect((await hit(7)).status).toBe(429);
      now += 10_000;
      for (let i = 0; i < 100; i++) expect((await hit(7)).status).toBe(200); // refilled to the burst, not beyond
      expect((await hit(7)).status).toBe(429);
    } finally {
      server.close();
    }
  });

  it('is mounted on /api/v1 for Bearer callers', async () => {
    const h = await createTestApp();
    try {
      const a = await h.agent('analyst');
      const token = (await a.post('/api/v1/tokens').send({ name: 'burst', role: 'analyst', expiresInDays: 1 })).body.token;
      const server: Server = await new Promise((r) => {
        const s = h.app.listen(0, '127.0.0.1', () => r(s));
      });
      try {
        const url = `http://127.0.0.1:${(server.address() as AddressInfo).port}/api/v1/plants`;
        const statuses = await Promise.all(Array.from({ length: 300 }, () => fetch(url, { headers: { Authorization: `Bearer ${token}` } }).then((r) => r.status)));
        expect(statuses.filter((s) => s === 200).length).toBeGreaterThanOrEqual(100);
        expect(statuses.filter((s) => s === 429).length).toBeGreaterThan(0);
        expect(statuses.every((s) => s === 200 || s === 429)).toBe(true);
      } finally {
        server.closeAllConnections();
        server.close();
      }
    } finally {
      await h.close();
    }
  });
});
