import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startBalanceEngine, type BalanceEngine } from '../../server/jobs/balance-engine.ts';
import { balanceOut } from '../../shared/contracts/balance.ts';
import { calcStatePoint } from '../../shared/domain/calculators.ts';
import { rasConcMaxFlux_gL } from '../../shared/domain/flux.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { operatingMinutes } from '../unit/domain/operating-series.ts';
import { seedFixturePlant, writeSignals } from './balance-fixture.ts';

const H = 3_600_000;
/** The sludge the stored series is generated from (Vesilind 1968 form v = v0·e^(−kX)). */
const TRUTH = { v0_mh: 6, k_Lg: 0.5 };

/**
 * The balance engine against PostgreSQL on a stored series of a known sludge: 48 hours of minute
 * rollups of the fixture clarifier (1500 m², 4 m) whose blanket stands at 1.5 m while the RAS flow
 * steps through 12 underflow rates 0.2 … 0.6 m/h, each hour's underflow TSS at the maximum of
 * solids-flux theory X_R = G_L/u (Keinath et al. 1977) for v0 = 6 m/h, k = 0.5 L/g
 * (tests/unit/domain/operating-series.ts). No lab test carries a settled volume, so the lab fit
 * has none and the operating fit is the first source with enough points.
 */
describe('balance engine: Vesilind v0 and k from the plant\'s own stable-blanket hours', () => {
  let h: TestApp;
  let engine: BalanceEngine;
  let plantId: number;
  let end: number;
  beforeAll(async () => {
    h = await createTestApp();
    let tagIds: Record<string, number>;
    ({ plantId, tagIds } = await seedFixturePlant(h.ctx, { code: 'opfit' }));
    // Latest values only (one bucket at the present second); the series below is the generated one.
    await writeSignals(h.ctx, tagIds, undefined, { history_h: 0 });
    const clock = (await h.ctx.db.pool.query<{ ts: Date }>('SELECT max(ts) AS ts FROM tag_latest l JOIN tags t ON t.id = l.tag_id WHERE t.plant_id = $1', [plantId])).rows[0]!.ts.getTime();
    end = Math.floor(clock / H) * H;
    const mins = operatingMinutes(TRUTH, end - 48 * H, 48);
    const write = async (tag: string, value: (m: (typeof mins)[number]) => number) =>
      h.ctx.db.pool.query(
        `INSERT INTO rollup_1m (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
         SELECT $1, b, v, v, v * 6, 6, v, b, 0 FROM unnest($2::timestamptz[], $3::float8[]) AS x(b, v)
         ON CONFLICT (tag_id, bucket) DO UPDATE SET min = excluded.min, max = excluded.max, sum = excluded.sum, count = excluded.count, last = excluded.last`,
        [tagIds[tag], mins.map((m) => new Date(m.t_ms)), mins.map(value)],
      );
    await write('LIT-211', (m) => m.level_m);
    await write('AIT-221', (m) => m.underflowTss_gL);
    await write('FIT-311', (m) => m.rasFlow_m3h);
    await write('FIT-321', (m) => m.wasFlow_m3h);
    await h.ctx.db.pool.query(`INSERT INTO settings (plant_id, key, value) VALUES ($1, 'settling.operating_window_d', '2')`, [plantId]);
    engine = await startBalanceEngine(h.ctx, { schedule: false, mailCatcher: false });
  });
  afterAll(async () => {
    await engine?.stop();
    await h.close();
  });

  it('reports the operating fit (n = 48, the hours\' dates, v0 and k recovered with standard errors) and the state point uses it, equal to the calculator on those parameters', async () => {
    const b = await engine.runOnce(plantId);
    const s = b.data.settling;
    expect(s.fit.n).toBe(0);
    expect(s.operatingFit).toMatchObject({ n: 48, minPoints: 24, quality: 'estimated', from: new Date(end - 47 * H).toISOString(), to: new Date(end).toISOString() });
    expect(s.operatingFit!.v0_mh).toBeCloseTo(6, 4);
    expect(s.operatingFit!.k_Lg).toBeCloseTo(0.5, 5);
    expect(s.operatingFit!.kStdErr_Lg).not.toBeNull();
    expect(s.used).toMatchObject({ source: 'operating-fit', n: 48 });
    expect(s.used.reasons.join(' ')).toMatch(/48 stable-blanket hours \(≥ 24/);
    const sp = b.data.clarifiers[0]!.statePoint;
    expect(sp.settling).toMatchObject({ source: 'operating-fit', n: 48, from: s.operatingFit!.from, to: s.operatingFit!.to });
    // The fixture's present flows (Q 800, Q_R 600, Q_W 20 m³/h, MLSS 3 g/L) with the fitted parameters, through the what-if calculator.
    const calc = calcStatePoint({ influentFlow_m3h: 800, rasFlow_m3h: 600, wasFlow_m3h: 20, mlss_gL: 3, clarifierArea_m2: 1500, settling: { v0_mh: sp.settling.v0_mh!, k_Lg: sp.settling.k_Lg! } });
    expect(sp.limitingFlux_kgm2h.value).toBe(calc.limitingFlux_kgm2h);
    expect(sp.thickeningMargin.value).toBe(calc.thickeningMargin);
    // X_R,max by flux theory at u = 620/1500 m/h is the generating sludge's G_L/u.
    expect(sp.rasConcMax.flux_gL.value).toBeCloseTo(rasConcMaxFlux_gL(620 / 1500, TRUTH).value!, 4);
    const row = await h.ctx.db.pool.query('SELECT data, inputs FROM balances WHERE id = $1', [b.id]);
    expect(balanceOut.safeParse({ ...b, data: row.rows[0].data, inputs: row.rows[0].inputs }).success).toBe(true);
  });

  it('with settling.operating_fit_min_points above the hours at hand, the correlation is used and the reason names the count', async () => {
    await h.ctx.db.pool.query(`INSERT INTO settings (plant_id, key, value) VALUES ($1, 'settling.operating_fit_min_points', '100')`, [plantId]);
    const b = await engine.runOnce(plantId);
    expect(b.data.settling.used.source).toBe('correlation');
    expect(b.data.settling.used.reasons.join(' ')).toMatch(/operating fit has 48 stable-blanket hour\(s\), fewer than 100/);
    expect(b.data.clarifiers[0]!.statePoint.settling.source).toBe('correlation');
    await h.ctx.db.pool.query(`DELETE FROM settings WHERE plant_id = $1 AND key = 'settling.operating_fit_min_points'`, [plantId]);
  });
});
