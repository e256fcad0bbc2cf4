import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startBalanceEngine, type BalanceEngine } from '../../server/jobs/balance-engine.ts';
import { startTestServer } from '../helpers/server.ts';
import { launchBrowser, shot } from '../helpers/browser.ts';
import { operatorOnBoard, seedKestrelBend, type Env } from './kestrel-bend-fixture.ts';

describe('operator on shift in Debian Chromium', () => {
  let env: Env;
  let b: { browser: Browser; close(): Promise<void> };
  let engine: BalanceEngine;
  let plantId: number;
  beforeAll(async () => {
    env = await startTestServer({ FLOCSTREAM_ADMIN_EMAIL: 'chief@kestrel.invalid', FLOCSTREAM_ADMIN_PASSWORD: 'e2e-admin-password-1' }, { jobs: false });
    plantId = await seedKestrelBend(env);
    engine = await startBalanceEngine(env.server.ctx, { schedule: false, mailCatcher: false });
    b = await launchBrowser();
  });
  afterAll(async () => {
    await b?.close();
    await engine?.stop();
    await env?.close();
  });

  it('watches the board go live, enters an SVI (and a CSV), and acknowledges an alarm', async () => {
    const { page, errors, op } = await operatorOnBoard(env, b.browser, 'operator');

    // No balance yet: the board says why, in the server's words.
    const none = page.getByTestId('no-balance');
    await none.waitFor();
    expect(await none.innerText()).toContain('no balance has been computed for this plant yet');
    await shot(page, 'board-no-balance');

    // The engine computes one; the board picks it up from the stream without a reload.
    await page.getByTestId('stream-state').filter({ hasText: 'live' }).waitFor();
    await engine.runOnce(plantId);
    const t2 = page.getByTestId('train-t2');
    await t2.waitFor({ timeout: 10_000 });
    expect(await page.getByTestId('no-balance').count()).toBe(0);
    // MLSS of train 2 from AIT-112, shown with its unit; blanket 2.25 m drawn in the clarifier section
    const proc2 = await t2.getByTestId('process').innerText();
    expect(proc2).toMatch(/MLSS\s+3\.30\s+g\/L/);
    expect(await t2.getByTestId('clarifier-section-sc2').getAttribute('aria-label')).toContain('blanket 2.25 m above the floor of a 4.00 m deep tank');
    // without any SVI the RAS limit is unknown: marked N/A, not a number
    const ras2 = t2.getByTestId('ras');
    expect(await ras2.locator('[data-figure="X_R,max from SVI"] [data-quality]').getAttribute('data-quality')).toBe('unavailable');
    await shot(page, 'board-before-svi');

    // Lab: the dilution rule is explained beside the field and enforced before sending.
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Lab' }).click();
    await page.waitForURL(/\/lab$/);
    const form = page.getByRole('form', { name: 'Lab result' });
    expect(await form.getByTestId('dilution-rule').innerText()).toMatch(/above 250 mL\/L is not a valid SVI: dilute/);
    await form.getByLabel('Settled volume (30 min) [mL/L]').fill('320');
    await form.getByLabel('MLSS, undiluted sample [g/L]').fill('3.1');
    await form.getByLabel('Location').selectOption('ab1');
    await form.getByRole('button', { name: 'Save result' }).click();
    const alert = form.getByRole('alert').first();
    await alert.waitFor();
    expect(await alert.innerText()).toMatch(/320 mL\/L is above 250 mL\/L: dilute and repeat/);
    await shot(page, 'lab-dilution-refused');
    // 240 mL/L at 3.1 g/L: SVI = 240/3.1 = 77.4 mL/g (design §3 item 8)
    await form.getByLabel('Settled volume (30 min) [mL/L]').fill('240');
    expect(await form.getByTestId('lab-preview').innerText()).toContain('SVI = 77.4 mL/g');
    await form.getByLabel('Note (who ran the test, remarks)').fill('morning test, e2e');
    await form.getByRole('button', { name: 'Save result' }).click();
    await form.getByTestId('lab-saved').waitFor();
    expect(await form.getByTestId('lab-saved').innerText()).toMatch(/Saved: SVI 77\.4 mL\/g/);
    const firstRow = page.getByTestId('lab-results').locator('tbody tr').first();
    await expect.poll(() => firstRow.innerText()).toMatch(/SVI\s+77\.4 mL\/g\s+ab1\s+settled 240 mL\/L · MLSS 3\.10 g\/L/);
    const stored = await env.server.ctx.db.pool.query('SELECT kind, value, entered_by FROM lab_results WHERE plant_id = $1', [plantId]);
    expect(stored.rows).toHaveLength(1);
    expect(stored.rows[0].value).toBeCloseTo(240 / 3.1, 6);

    // CSV: one bad row refuses the whole file, with the row and field named.
    const upload = page.getByRole('region', { name: 'Upload lab results (CSV)' });
    const when = new Date(Date.now() - 3_600_000).toISOString();
    const bad = `kind,sampledAt,location,settledVolume_mLL,mlss_gL,tss_mgL\nTSS,${when},sc1,,,11\nSVI,${when},ab2,300,3.3,\n`;
    await upload.getByLabel('CSV file').setInputFiles({ name: 'bad.csv', mimeType: 'text/csv', buffer: Buffer.from(bad) });
    await upload.getByRole('button', { name: 'Upload' }).click();
    await upload.getByTestId('import-errors').waitFor();
    const errText = await upload.getByTestId('import-errors').innerText();
    expect(errText).toContain('Nothing was stored');
    expect(errText).toMatch(/3\s+settledVolume_mLL\s+settled volume 300 mL\/L is above 250 mL\/L/);
    expect(await upload.innerText()).toContain('All or nothing');
    expect((await env.server.ctx.db.pool.query('SELECT count(*)::int AS n FROM lab_results')).rows[0].n).toBe(1);
    await shot(page, 'lab-csv-refused');
    errors.length = 0; // the browser logs the deliberate 422 as a failed resource
    const good = `kind,sampledAt,location,settledVolume_mLL,mlss_gL,tss_mgL\nTSS,${when},sc1,,,11\nMLSS,${when},ab2,,3.3,\n`;
    await upload.getByLabel('CSV file').setInputFiles({ name: 'good.csv', mimeType: 'text/csv', buffer: Buffer.from(good) });
    await upload.getByRole('button', { name: 'Upload' }).click();
    await upload.getByTestId('import-ok').waitFor();
    expect(await upload.getByTestId('import-ok').innerText()).toBe('Stored 2 results.');
    await expect.poll(() => page.getByTestId('lab-results').locator('tbody tr').count()).toBe(3);
    await shot(page, 'lab-after-entry');

    // Back on the board: the next balance uses the SVI; margins and the storm checks get numbers.
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Board' }).click();
    await page.getByTestId('train-t2').waitFor();
    await page.getByTestId('stream-state').filter({ hasText: 'live' }).waitFor();
    await engine.runOnce(plantId);
    const basis = page.getByRole('region', { name: 'Basis' });
    await expect.poll(() => basis.innerText(), { timeout: 10_000 }).toMatch(/Settleability \(SVI\)\s+77\.4\s+mL\/g/);
    // X_R,max = 1200 / 77.4 = 15.5 g/L (design §3 item 2, default factor)
    expect(await page.getByTestId('train-t1').getByTestId('ras').innerText()).toMatch(/X_R,max from SVI\s+15\.5\s+g\/L/);
    const checks = page.getByTestId('train-t2').getByTestId('storm-checks');
    expect(await checks.locator('li').count()).toBe(3);
    for (const li of await checks.locator('li').all()) expect(await li.innerText()).toMatch(/^(PASS|FAIL)\b/);
    expect(await page.getByTestId('caution').first().innerText()).toBe('Advisory only — check against lab results and procedures; the licensed operator decides.');
    await shot(page, 'board-1920');
    await page.setViewportSize({ width: 1280, height: 900 });
    await shot(page, 'board-1280');
    expect(await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth)).toBeLessThanOrEqual(0);
    await page.setViewportSize({ width: 1920, height: 1080 });

    // "Trend inputs" on train 1 opens its own mapped signals (at most 8), the sludge blanket first.
    const mapped = await env.server.ctx.db.pool.query<{ tag_id: number; signal: string }>(
      `SELECT sm.tag_id, sm.signal FROM signal_map sm JOIN trains t ON t.plant_id = sm.plant_id AND t.code = 't1'
       WHERE (sm.target_type = 'basin' AND sm.target_id IN (SELECT id FROM basins WHERE train_id = t.id))
          OR (sm.target_type = 'clarifier' AND sm.target_id IN (SELECT id FROM clarifiers WHERE train_id = t.id))
          OR (sm.target_type = 'pump' AND sm.target_id IN (SELECT id FROM pumps WHERE train_id = t.id))`,
    );
    await page.getByTestId('train-t1').getByRole('link', { name: 'Trend inputs' }).click();
    const lanes = page.getByTestId('trend-lane');
    await expect.poll(() => lanes.count()).toBe(Math.min(8, mapped.rows.length));
    const laneTags = await lanes.evaluateAll((ls) => ls.map((l) => Number(l.getAttribute('data-tag-id'))));
    expect(laneTags.every((id) => mapped.rows.some((r) => r.tag_id === id))).toBe(true);
    expect(laneTags[0]).toBe(mapped.rows.find((r) => r.signal === 'clarifier.blanketLevel')!.tag_id);
    expect(await page.getByRole('button', { name: '24 h' }).getAttribute('aria-pressed')).toBe('true');
    await shot(page, 'trend-inputs-t1');

    // Alarms: clarifier 2's blanket is above its limit; the operator acknowledges it.
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Alarms' }).click();
    const active = page.getByTestId('active-alarms');
    const row = active.locator('tr[data-rule="blanket-high"]');
    await row.waitFor();
    expect(await row.innerText()).toMatch(/P2\s+ACTIVE · UNACK/);
    expect(await row.getByRole('img', { name: 'priority 2' }).count()).toBe(1);
    await shot(page, 'alarms-before-ack');
    await row.getByRole('button', { name: 'Acknowledge blanket-high sc2' }).click();
    await expect.poll(() => row.innerText()).toMatch(/ACTIVE · ACK/);
    // No Acknowledge button any more (the row keeps its Shelve… button: shelving is for active alarms, acknowledged or not).
    expect(await row.getByRole('button', { name: /^Acknowledge/ }).count()).toBe(0);
    const acked = await env.server.ctx.db.pool.query(
      `SELECT a.state, u.email FROM alarms a JOIN users u ON u.id = a.acknowledged_by WHERE a.plant_id = $1 AND a.rule = 'blanket-high' AND a.target = 'sc2'`,
      [plantId],
    );
    expect(acked.rows).toEqual([{ state: 'acknowledged', email: op!.email }]);
    // keyboard only: Tab reaches the next Acknowledge button and Enter presses it
    const rising = active.locator('tr[data-rule="blanket-rising"]');
    await rising.getByRole('button', { name: 'Acknowledge blanket-rising sc2' }).focus();
    await page.keyboard.press('Enter');
    await expect.poll(() => rising.innerText()).toMatch(/ACTIVE · ACK/);
    expect(await page.getByTestId('alarm-counts').innerText()).toMatch(/4 needing attention · 2 unacknowledged/);
    await shot(page, 'alarms-after-ack');

    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
  });
});
