import type { AppContext } from '../../server/app-context.ts';
import type { PlantConfigInput } from '../../shared/contracts/plant-config.ts';
import type { SignalKindName } from '../../shared/contracts/plant-layout.ts';
import { seedPlantConfig } from '../helpers/plants.ts';

/**
 * One-train plant in the database with steady signals written straight into tag_latest and
 * rollup_1m (no broker, no ingest): Q 800 m³/h, Q_R 600, Q_W 20, MLSS 3.0 g/L, underflow
 * 8.0 g/L, effluent 10 mg/L, blanket 1.0 m, SVI 120 mL/g — the same numbers as the unit-test
 * fixture, whose hand computation (tests/unit/domain/balance-assemble.test.ts) applies here.
 * Created from a configuration document, the path POST /api/v1/plants takes.
 */
const FIXTURE_TAGS: Array<{ name: string; unit: string; kind: SignalKindName; target: string; period: number }> = [
  { name: 'FIT-111', unit: 'm3/h', kind: 'basin.influentFlow', target: 'ab1', period: 10 },
  { name: 'AIT-111', unit: 'g/L', kind: 'basin.mlss', target: 'ab1', period: 10 },
  { name: 'LIT-211', unit: 'm', kind: 'clarifier.blanketLevel', target: 'sc1', period: 60 },
  { name: 'AIT-221', unit: 'g/L', kind: 'clarifier.underflowTss', target: 'sc1', period: 30 },
  { name: 'AIT-231', unit: 'mg/L', kind: 'clarifier.effluentTss', target: 'sc1', period: 30 },
  { name: 'FIT-311', unit: 'm3/h', kind: 'pump.flow', target: 'ras1', period: 5 },
  { name: 'FIT-321', unit: 'm3/h', kind: 'pump.flow', target: 'was1', period: 10 },
];

export function fixtureConfig(code: string): PlantConfigInput {
  return {
    formatVersion: 1,
    plant: { code, name: 'Fixture Works', peakFlow_m3h: 1600 },
    model: {
      trains: [
        {
          code: 't1',
          name: 'Train 1',
          aerationBasins: [{ code: 'ab1', name: 'Basin 1', volume_m3: 6000 }],
          secondaryClarifiers: [{ code: 'sc1', name: 'Clarifier 1', area_m2: 1500, sideWaterDepth_m: 4, count: 1 }],
          pumps: [
            { code: 'ras1', name: 'RAS 1', kind: 'ras', capacity_m3h: 850, servesClarifier: 'sc1' },
            { code: 'was1', name: 'WAS 1', kind: 'was', capacity_m3h: 60, servesClarifier: 'sc1' },
          ],
        },
      ],
    },
    sources: [{ kind: 'mqtt', name: `${code}-mqtt`, url: 'mqtt://127.0.0.1:1' }],
    tags: FIXTURE_TAGS.map((t) => ({ name: t.name, source: `${code}-mqtt`, address: `${code}/${t.name}`, unit: t.unit, rangeLow: 0, rangeHigh: 5000, expectedPeriod_s: t.period })),
    signalMap: FIXTURE_TAGS.map((t) => ({ signal: t.kind, target: { type: t.kind.split('.')[0] as 'basin' | 'clarifier' | 'pump', code: t.target }, tag: t.name })),
  };
}

export const FIXTURE_VALUES: Record<string, number> = { 'FIT-111': 800, 'AIT-111': 3.0, 'LIT-211': 1.0, 'AIT-221': 8.0, 'AIT-231': 10, 'FIT-311': 600, 'FIT-321': 20 };

export async function seedFixturePlant(ctx: AppContext, opts: { code?: string; svi?: boolean } = {}): Promise<{ plantId: number; tagIds: Record<string, number> }> {
  const code = opts.code ?? 'fx';
  const { plantId } = await seedPlantConfig(ctx, fixtureConfig(code));
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
