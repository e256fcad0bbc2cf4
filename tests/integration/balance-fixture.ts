import type { AppContext } from '../../server/app-context.ts';
import { seedPlant } from '../../server/services/plant-seed.service.ts';
import type { PlantLayout } from '../../shared/contracts/plant-layout.ts';

/**
 * One-train plant in the database with steady signals written straight into tag_latest and
 * rollup_1m (no broker, no ingest): Q 800 m³/h, Q_R 600, Q_W 20, MLSS 3.0 g/L, underflow
 * 8.0 g/L, effluent 10 mg/L, blanket 1.0 m, SVI 120 mL/g — the same numbers as the unit-test
 * fixture, whose hand computation (tests/unit/domain/balance-assemble.test.ts) applies here.
 */
const tag = (name: string, unit: string, kind: NonNullable<PlantLayout['tags'][number]['signal']>['kind'], target: string, period: number) => ({
  name,
  unit,
  protocol: 'mqtt' as const,
  address: `fx/${name}`,
  rangeLow: 0,
  rangeHigh: 5000,
  expectedPeriod_s: period,
  signal: { kind, target },
});

export const FIXTURE_LAYOUT: PlantLayout = {
  name: 'Fixture Works',
  code: 'fx',
  peakFlow_m3h: 1600,
  trains: [
    {
      code: 't1',
      name: 'Train 1',
      basins: [{ code: 'ab1', name: 'Basin 1', volume_m3: 6000 }],
      clarifiers: [{ code: 'sc1', name: 'Clarifier 1', area_m2: 1500, sideWaterDepth_m: 4, count: 1 }],
      pumps: [
        { code: 'ras1', name: 'RAS 1', kind: 'ras', capacity_m3h: 850 },
        { code: 'was1', name: 'WAS 1', kind: 'was', capacity_m3h: 60 },
      ],
    },
  ],
  tags: [
    tag('FIT-111', 'm3/h', 'basin.influentFlow', 'ab1', 10),
    tag('AIT-111', 'g/L', 'basin.mlss', 'ab1', 10),
    tag('LIT-211', 'm', 'clarifier.blanketLevel', 'sc1', 60),
    tag('AIT-221', 'g/L', 'clarifier.underflowTss', 'sc1', 30),
    tag('AIT-231', 'mg/L', 'clarifier.effluentTss', 'sc1', 30),
    tag('FIT-311', 'm3/h', 'pump.flow', 'ras1', 5),
    tag('FIT-321', 'm3/h', 'pump.flow', 'was1', 10),
  ],
};
export const FIXTURE_VALUES: Record<string, number> = { 'FIT-111': 800, 'AIT-111': 3.0, 'LIT-211': 1.0, 'AIT-221': 8.0, 'AIT-231': 10, 'FIT-311': 600, 'FIT-321': 20 };

export async function seedFixturePlant(ctx: AppContext, opts: { code?: string; svi?: boolean } = {}): Promise<{ plantId: number; tagIds: Record<string, number> }> {
  const code = opts.code ?? 'fx';
  const { plantId } = await seedPlant(ctx, { ...FIXTURE_LAYOUT, code, tags: FIXTURE_LAYOUT.tags.map((t) => ({ ...t, address: `${code}/${t.name}` })) }, { mqttUrl: 'mqtt://127.0.0.1:1', opcuaUrl: 'opc.tcp://127.0.0.1:1' });
  const r = await ctx.db.pool.query('SELECT id, name FROM tags WHERE plant_id = $1', [plantId]);
  const tagIds = Object.fromEntries(r.rows.map((x) => [x.name, x.id]));
  if (opts.svi !== false) {
    await ctx.db.pool.query(`INSERT INTO lab_results (plant_id, kind, value, unit, sampled_at) VALUES ($1, 'SVI', 120, 'mL/g', now() - interval '2 hours')`, [plantId]);
  }
  return { plantId, tagIds };
}

/**
 * Writes the latest values (received now, unless told otherwise) and 24 h of steady minute
 * rollups. `at` is "now" for a test that runs the engine on an injected clock (default: the
 * database's clock).
 */
export async function writeSignals(ctx: AppContext, tagIds: Record<string, number>, values: Record<string, number> = FIXTURE_VALUES, opts: { receivedAgo_s?: Record<string, number>; quality?: Record<string, number>; history_h?: number; at?: Date } = {}) {
  const now = await ctx.db.pool.query<{ now: Date; t: Date }>('SELECT n AS now, date_trunc($1, n) AS t FROM COALESCE($2::timestamptz, now()) AS n', ['second', opts.at ?? null]);
  const { now: receivedNow, t } = now.rows[0]!;
  for (const [name, id] of Object.entries(tagIds)) {
    const v = values[name];
    if (v === undefined) continue;
    const ago = opts.receivedAgo_s?.[name] ?? 0;
    await ctx.db.pool.query(
      `INSERT INTO tag_latest (tag_id, ts, value, quality, received_at) VALUES ($1, $2, $3, $4, $6::timestamptz - make_interval(secs => $5::float8))
       ON CONFLICT (tag_id) DO UPDATE SET ts = excluded.ts, value = excluded.value, quality = excluded.quality, received_at = excluded.received_at`,
      [id, t, v, opts.quality?.[name] ?? 0, ago, receivedNow],
    );
    const hours = opts.history_h ?? 24;
    await ctx.db.pool.query(
      `INSERT INTO rollup_1m (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
       SELECT $1, b, $3::float8, $3::float8, $3::float8 * 6, 6, $3::float8, b, 0 FROM generate_series($2::timestamptz - make_interval(hours => $4::int), $2::timestamptz, interval '1 minute') AS b
       ON CONFLICT (tag_id, bucket) DO UPDATE SET sum = excluded.sum, count = excluded.count, min = excluded.min, max = excluded.max, last = excluded.last`,
      [id, t, v, hours],
    );
  }
}
