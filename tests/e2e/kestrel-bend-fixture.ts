import type { Browser } from 'playwright-core';
import { expect, onTestFailed } from 'vitest';
import { services } from '../../server/app-context.ts';
import { shot, signIn, watchConsole } from '../helpers/browser.ts';
import { seedDemoPlant } from '../helpers/plants.ts';
import type { startTestServer } from '../helpers/server.ts';

/**
 * Kestrel Bend (our invented demo plant) on a quiet morning, except that clarifier 2's blanket
 * has been climbing for an hour: 1.65 m → 2.25 m (0.6 m/h) against the 2.0 m limit (half of the
 * 4 m side-water depth). Values per tag: the latest value and, for the rolling windows, one
 * rollup_1m bucket a minute over the last 24 h (constant, or the ramp for LIT-212).
 */
export const FIXTURE: Record<string, { v: number; ramp_per_h?: number }> = {
  'FIT-101': { v: 1560 },
  'FIT-111': { v: 780 },
  'FIT-112': { v: 780 },
  'AIT-111': { v: 3.1 },
  'AIT-112': { v: 3.3 },
  'LIT-211': { v: 0.85 },
  'LIT-212': { v: 2.25, ramp_per_h: 0.6 },
  'AIT-221': { v: 7.8 },
  'AIT-222': { v: 8.4 },
  'AIT-231': { v: 9 },
  'AIT-232': { v: 14 },
  'FIT-311': { v: 560 },
  'FIT-312': { v: 540 },
  'YI-311': { v: 1 },
  'YI-312': { v: 1 },
  'FIT-321': { v: 26 },
  'FIT-322': { v: 24 },
  'FIT-401': { v: 1510 },
};


export type Env = Awaited<ReturnType<typeof startTestServer>>;

/** Seeds Kestrel Bend and writes the fixture signals into tag_latest and rollup_1m (what ingest would have written). */
export async function seedKestrelBend(env: Env): Promise<number> {
  const ctx = env.server.ctx;
  const { plantId } = await seedDemoPlant(ctx, { mqttUrl: 'mqtt://127.0.0.1:1', opcuaUrl: 'opc.tcp://127.0.0.1:2' });
  const pool = ctx.db.pool;
  const tags = (await pool.query<{ id: number; name: string }>('SELECT id, name FROM tags WHERE plant_id = $1', [plantId])).rows;
  expect(tags.length).toBe(Object.keys(FIXTURE).length);
  for (const t of tags) {
    const f = FIXTURE[t.name];
    if (!f) throw new Error(`no fixture value for ${t.name}`);
    await pool.query('INSERT INTO tag_latest (tag_id, ts, value, quality, received_at) VALUES ($1, now() - interval \'2 s\', $2, 0, now())', [t.id, f.v]);
    // v(minutes ago m) = v − ramp · min(m, 60)/60: the ramp covers the last hour, flat before it.
    await pool.query(
      `INSERT INTO rollup_1m (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
       SELECT $1, b, x, x, x * 6, 6, x, b + interval '50 s', 0
         FROM generate_series(date_trunc('minute', now()) - interval '24 hours', date_trunc('minute', now()) - interval '1 minute', interval '1 minute') AS b,
              LATERAL (SELECT $2::float8 - $3::float8 * least(extract(epoch FROM now() - b) / 60, 60) / 60 AS x) AS s`,
      [t.id, f.v, f.ramp_per_h ?? 0],
    );
  }
  // Raise alarms on the first balance that meets a condition (the default on-delay is 60 s).
  await services(ctx).settings.put(null, { plantId, values: { 'alarm.on_delay_s': 0 } });
  return plantId;
}



/**
 * The demo operator signed in on the board at 1920×1080, the page's console watched, and the
 * screen and console kept under `<name>-failed` if the test fails: how the board tests begin.
 */
export async function operatorOnBoard(env: Env, browser: Browser, name: string) {
  const op = env.server.credentials.find((c) => c.role === 'operator');
  expect(op, 'demo operator').toBeDefined();
  const page = await browser.newPage({ viewport: { width: 1920, height: 1080 } });
  const errors = watchConsole(page);
  onTestFailed(async () => {
    await shot(page, `${name}-failed`);
    console.error('console errors at failure:', errors);
  });
  await signIn(page, `${env.server.url}/`, op!, /\/board$/);
  return { page, errors, op: op! };
}
