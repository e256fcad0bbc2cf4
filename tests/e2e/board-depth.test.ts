import path from 'node:path';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BalanceData } from '../../shared/contracts/balance.ts';
import { startBalanceEngine, type BalanceEngine } from '../../server/jobs/balance-engine.ts';
import { startTestServer } from '../helpers/server.ts';
import { launchBrowser, SCREENSHOT_DIR, shot } from '../helpers/browser.ts';
import { operatorOnBoard, seedKestrelBend, type Env } from './kestrel-bend-fixture.ts';
import { operatingMinutes } from '../unit/domain/operating-series.ts';

/**
 * Ten SVI tests over the last 20 days, generated from a Vesilind sludge v0 = 4 m/h, k = 0.8 L/g
 * as settling-fit.ts reads a test (v = H·(1 − SV30/1000)/0.5 h, H = 0.35 m for the 1 L mark):
 * SV30 = 1000·(1 − v·0.5/0.35) at MLSS 2.5–4.3 g/L, i.e. SVI ≈ 90–190 mL/g. Ten tests reach the
 * default minimum of setting settling.fit_min_points, so the state points use the plant's fit.
 */
const TESTS = Array.from({ length: 10 }, (_, i) => {
  const mlss_gL = 2.5 + 0.2 * i;
  const v_mh = 4 * Math.exp(-0.8 * mlss_gL);
  return { mlss_gL, sv30: Math.round(1000 * (1 - (v_mh * 0.5) / 0.35)), daysAgo: 20 - 2 * i };
});

describe('board depth in Debian Chromium: state points, the storm in time, the settling fit', () => {
  let env: Env;
  let b: { browser: Browser; close(): Promise<void> };
  let engine: BalanceEngine;
  let plantId: number;
  beforeAll(async () => {
    env = await startTestServer({ FLOCSTREAM_ADMIN_EMAIL: 'chief@kestrel.invalid', FLOCSTREAM_ADMIN_PASSWORD: 'e2e-admin-password-1' }, { jobs: false });
    plantId = await seedKestrelBend(env);
    for (const t of TESTS) {
      await env.server.ctx.db.pool.query(
        `INSERT INTO lab_results (plant_id, location, kind, value, unit, sampled_at, details) VALUES ($1, 'ab1', 'SVI', $2, 'mL/g', now() - make_interval(days => $3), $4)`,
        [plantId, t.sv30 / t.mlss_gL, t.daysAgo, JSON.stringify({ settledVolume_mLL: t.sv30, mlss_gL: t.mlss_gL })],
      );
    }
    engine = await startBalanceEngine(env.server.ctx, { schedule: false, mailCatcher: false });
    b = await launchBrowser();
  });
  afterAll(async () => {
    await b?.close();
    await engine?.stop();
    await env?.close();
  });

  it('draws a live state point per clarifier, the design storm in time and the fit beside the correlation', async () => {
    const { page, errors } = await operatorOnBoard(env, b.browser, 'board-depth');
    await page.getByTestId('stream-state').filter({ hasText: 'live' }).waitFor();
    await engine.runOnce(plantId);
    const t2 = page.getByTestId('train-t2');
    await t2.waitFor({ timeout: 10_000 });
    const row = await env.server.ctx.db.pool.query<{ data: BalanceData }>('SELECT data FROM balances WHERE plant_id = $1 ORDER BY ts DESC LIMIT 1', [plantId]);
    const data = row.rows[0]!.data;

    // Settling: ten tests fit, so the state points use the fit, and the board says so with n and dates.
    expect(data.settling.fit.n).toBe(10);
    expect(data.settling.used.source).toBe('fit');
    // the fit recovers the generating sludge (SV30 rounded to 1 mL/L moves v by < 0.3 %)
    expect(data.settling.fit.k_Lg!).toBeCloseTo(0.8, 2);
    expect(data.settling.fit.v0_mh!).toBeCloseTo(4, 1);
    const cmp = page.getByTestId('settling-comparison');
    const fitRow = await cmp.getByTestId('settling-fit').innerText();
    expect(fitRow).toContain('▸');
    expect(fitRow).toContain('n = 10');
    expect(fitRow).toContain(data.settling.fit.from!.slice(0, 10));
    expect(fitRow).toContain(data.settling.fit.to!.slice(0, 10));
    expect(fitRow).toMatch(/±/);
    expect(await cmp.getByTestId('settling-correlation').innerText()).toContain('Härtel & Pöpel (1992)');
    expect(await cmp.getByTestId('settling-used').innerText()).toContain('state points use the plant fit');

    // One state point diagram per clarifier, live, with its source line.
    for (const c of data.clarifiers) {
      const sp = page.getByTestId(`state-point-${c.code}`);
      await sp.getByTestId('state-point-diagram').waitFor();
      expect(await sp.getByTestId('total-flux').count()).toBe(1);
      expect(await sp.getByTestId('underflow-line').count()).toBe(1);
      expect(await sp.getByTestId('state-point-marker').count()).toBe(1);
      // the state point sits at the clarifier's MLSS (title names it to 2 decimals)
      expect(await sp.locator('title').first().textContent()).toContain(`X = ${c.statePoint.feed.mlss_gL.value!.toFixed(2)} g/L`);
      // v0 e^(−2) = 0.54 m/h exceeds the underflow rate (≈ 0.38 m/h): the total flux has a minimum, G_L
      expect(c.statePoint.limitingFlux_kgm2h.value).not.toBeNull();
      expect(await sp.getByTestId('state-point-diagram').textContent()).toContain(`G_L = ${c.statePoint.limitingFlux_kgm2h.value!.toFixed(2)}`);
      const src = sp.getByTestId('settling-source');
      expect(await src.getAttribute('data-source')).toBe('fit');
      expect(await src.innerText()).toContain('n = 10');
    }

    // The storm in time, per train: the text follows the balance's first failure.
    for (const t of data.trains) {
      const tl = t.storm.timeline;
      expect(tl.points.length).toBeGreaterThan(1);
      const text = await page.getByTestId(`train-${t.code}`).getByTestId('storm-first-failure').innerText();
      if (tl.firstFailure_h === null) expect(text).toBe('No check fails within the design storm');
      else expect(text).toMatch(/^First check fails after \d/);
      expect(await page.getByTestId(`train-${t.code}`).getByTestId('storm-blanket-line').count()).toBe(1);
      // The sparkline recovers the storm's flow from the required RAS concentration by the
      // clarifier mass balance X_R = X·(Q + Q_R)/Q_R [common practice]: at the peak of the default
      // hydrograph (a step to the peak flow) it must equal the storm flow of the equilibrium projection.
      const qr = t.rasFlow_m3h.value!;
      const peak = Math.max(...tl.points.map((p) => qr * (p.rasConcRequired_gL! / p.mlss_gL - 1)));
      expect(peak / t.storm.stormFlow_m3h.value!).toBeCloseTo(1, 2);
    }
    expect(await page.getByTestId('storm-hydrograph').count()).toBe(data.trains.length);

    await shot(page, 'board-depth-1920');
    await page.setViewportSize({ width: 1366, height: 768 });
    await shot(page, 'board-depth-1366');
    expect(await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth)).toBeLessThanOrEqual(0);
    // the one 401 is the session probe before sign-in
    expect(errors.filter((e) => !e.includes('status of 401'))).toEqual([]);
  });

  it('without enough lab tests, the state points use the fit to the plant\'s stable-blanket hours, shown with n in hours and dates beside the lab fit and the correlation', async () => {
    const pool = env.server.ctx.db.pool;
    // The lab tests lose their readings (the latest SVI stays for the rule), so the lab fit has none.
    await pool.query(`UPDATE lab_results SET details = '{}' WHERE plant_id = $1`, [plantId]);
    // 48 hours of clarifier 2 (1500 m², 4 m, as in the demo layout) generated from a sludge with
    // v0 = 6 m/h, k = 0.5 L/g: a blanket steady at 1.5 m while the RAS flow steps through 12
    // underflow rates, the underflow at the limiting flux X_R = G_L/u (Keinath et al. 1977;
    // tests/unit/domain/operating-series.ts). Clarifier 1's blanket (0.85 m) is under a quarter
    // of its depth, so it gives no period.
    const clock = (await pool.query<{ ts: Date }>('SELECT max(l.ts) AS ts FROM tag_latest l JOIN tags t ON t.id = l.tag_id WHERE t.plant_id = $1', [plantId])).rows[0]!.ts.getTime();
    const end = Math.floor(clock / 3_600_000) * 3_600_000;
    const mins = operatingMinutes({ v0_mh: 6, k_Lg: 0.5 }, end - 48 * 3_600_000, 48);
    const series: Array<[string, (m: (typeof mins)[number]) => number]> = [
      ['LIT-212', (m) => m.level_m],
      ['AIT-222', (m) => m.underflowTss_gL],
      ['FIT-312', (m) => m.rasFlow_m3h],
      ['FIT-322', (m) => m.wasFlow_m3h],
    ];
    for (const [tag, value] of series) {
      await pool.query(
        `INSERT INTO rollup_1m (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
         SELECT (SELECT id FROM tags WHERE plant_id = $1 AND name = $2), b, v, v, v * 6, 6, v, b, 0 FROM unnest($3::timestamptz[], $4::float8[]) AS x(b, v)
         ON CONFLICT (tag_id, bucket) DO UPDATE SET min = excluded.min, max = excluded.max, sum = excluded.sum, count = excluded.count, last = excluded.last`,
        [plantId, tag, mins.map((m) => new Date(m.t_ms)), mins.map(value)],
      );
    }
    // A fresh engine: the first one has already read these hours (each hour is read once).
    await engine.stop();
    engine = await startBalanceEngine(env.server.ctx, { schedule: false, mailCatcher: false });
    const { page, errors } = await operatorOnBoard(env, b.browser, 'board-settling-operating');
    await page.getByTestId('stream-state').filter({ hasText: 'live' }).waitFor();
    const bal = await engine.runOnce(plantId);
    const s = bal.data.settling;
    expect(s.fit.n).toBe(0);
    expect(s.operatingFit).toMatchObject({ n: 48, from: new Date(end - 47 * 3_600_000).toISOString(), to: new Date(end).toISOString() });
    expect(s.operatingFit!.v0_mh!).toBeCloseTo(6, 4);
    expect(s.operatingFit!.k_Lg!).toBeCloseTo(0.5, 5);
    expect(s.used.source).toBe('operating-fit');

    const cmp = page.getByTestId('settling-comparison');
    const opRow = cmp.getByTestId('settling-operating-fit');
    await opRow.filter({ hasText: '▸' }).waitFor({ timeout: 10_000 });
    const text = await opRow.innerText();
    expect(text).toContain('n = 48 h');
    expect(text).toContain(s.operatingFit!.from!.slice(0, 10));
    expect(text).toContain(s.operatingFit!.to!.slice(0, 10));
    expect(text).toMatch(/±/);
    expect(await cmp.getByTestId('settling-fit').innerText()).toContain('(needs 10)');
    expect(await cmp.getByTestId('settling-correlation').innerText()).toContain('Härtel & Pöpel (1992)');
    expect(await cmp.getByTestId('settling-used').innerText()).toContain('state points use the operating fit');
    for (const c of bal.data.clarifiers) {
      const src = page.getByTestId(`state-point-${c.code}`).getByTestId('settling-source');
      expect(await src.getAttribute('data-source')).toBe('operating-fit');
      expect(await src.innerText()).toContain('stable-blanket hours (n = 48 h');
      // with the fit's standard errors (v0 ×/÷ e^SE, k ± SE)
      expect(await src.innerText()).toMatch(/v0 = [\d.]+ ×\/÷ [\d.]+ m\/h, k = [\d.]+ ± [\d.]+ L\/g/);
    }
    await shot(page, 'board-settling-operating');
    await cmp.screenshot({ path: path.join(SCREENSHOT_DIR, 'board-settling-operating-basis.png') });
    expect(errors.filter((e) => !e.includes('status of 401'))).toEqual([]);
  });
});
