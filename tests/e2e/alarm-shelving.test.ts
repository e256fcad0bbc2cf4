import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startBalanceEngine, type BalanceEngine } from '../../server/jobs/balance-engine.ts';
import { launchBrowser, shot, signIn, watchConsole } from '../helpers/browser.ts';
import { startTestServer } from '../helpers/server.ts';
import { operatorOnBoard, seedKestrelBend, type Env } from './kestrel-bend-fixture.ts';

/**
 * Shelving from the alarms view (ISA-18.2 shelving: an operator takes an alarm off annunciation
 * for a set time with a reason; it always expires). Kestrel Bend's fixture raises blanket-high
 * on clarifier 2; the operator shelves it for 2 h, sees it listed as shelved with its expiry,
 * and takes it off the shelf again; an analyst (read-only) sees the shelf but no buttons.
 */
describe('alarm shelving in Debian Chromium', () => {
  let env: Env;
  let b: { browser: Browser; close(): Promise<void> };
  let engine: BalanceEngine;
  let plantId: number;
  beforeAll(async () => {
    env = await startTestServer({}, { jobs: false });
    plantId = await seedKestrelBend(env);
    engine = await startBalanceEngine(env.server.ctx, { schedule: false, mailCatcher: false });
    await engine.runOnce(plantId);
    b = await launchBrowser();
  });
  afterAll(async () => {
    await b?.close();
    await engine?.stop();
    await env?.close();
  });

  it('an operator shelves an alarm with a reason and a length, sees its expiry, and unshelves it; an analyst sees no buttons', async () => {
    const pool = env.server.ctx.db.pool;
    const { page, errors } = await operatorOnBoard(env, b.browser, 'alarm-shelving');
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Alarms' }).click();
    const active = page.getByTestId('active-alarms');
    const row = active.locator('tr[data-rule="blanket-high"]');
    await row.waitFor();
    expect(await row.innerText()).toMatch(/ACTIVE · UNACK/);

    // The form opens for that alarm; a shelf without a reason is refused before sending.
    await row.getByRole('button', { name: 'Shelve blanket-high sc2' }).click();
    const form = page.getByRole('form', { name: 'Shelve alarm' });
    await form.waitFor();
    expect(await form.innerText()).toContain('blanket-high · sc2');
    await form.getByRole('button', { name: 'Shelve', exact: true }).click();
    expect(await form.getByRole('alert').first().innerText()).toBe('required');
    expect((await pool.query(`SELECT count(*)::int n FROM alarms WHERE plant_id = $1 AND shelved_until IS NOT NULL`, [plantId])).rows[0].n).toBe(0);

    await form.getByLabel('Reason').fill('desludging clarifier 2 this morning, blanket high by design');
    await form.getByLabel('For').selectOption({ label: '2 h' });
    await shot(page, 'alarm-shelve-form');
    const before = Date.now();
    await form.getByRole('button', { name: 'Shelve', exact: true }).click();
    await expect.poll(() => row.innerText()).toMatch(/SHELVED/);
    expect(await form.count()).toBe(0);

    // Stored with its expiry 2 h on (the server's clock) and audited with the reason.
    const stored = (await pool.query(`SELECT id, shelved_until, shelve_reason FROM alarms WHERE plant_id = $1 AND rule = 'blanket-high' AND target = 'sc2'`, [plantId])).rows[0];
    expect(stored.shelve_reason).toBe('desludging clarifier 2 this morning, blanket high by design');
    const until = (stored.shelved_until as Date).getTime();
    expect(until).toBeGreaterThanOrEqual(before + 2 * 3_600_000 - 1000);
    expect(until).toBeLessThanOrEqual(Date.now() + 2 * 3_600_000 + 1000);
    const audit = await pool.query(`SELECT details FROM audit_log WHERE action = 'alarm.shelve' AND target = $1`, [`alarm:${stored.id}`]);
    expect(audit.rows).toHaveLength(1);
    expect(audit.rows[0].details).toMatchObject({ minutes: 120, reason: 'desludging clarifier 2 this morning, blanket high by design' });

    // The row shows the expiry in UTC as the other times of the view are shown.
    const expiry = new Date(until).toISOString().slice(11, 16);
    expect(await row.innerText()).toContain(expiry);
    expect(await row.getByTestId('shelve-reason').innerText()).toContain('desludging clarifier 2 this morning');
    expect(await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth)).toBeLessThanOrEqual(0);
    await shot(page, 'alarm-shelved');

    // Off the shelf again: annunciated (active, unacknowledged) and audited.
    await row.getByRole('button', { name: 'Unshelve blanket-high sc2' }).click();
    await expect.poll(() => row.innerText()).toMatch(/ACTIVE · UNACK/);
    expect((await pool.query(`SELECT shelved_until FROM alarms WHERE id = $1`, [stored.id])).rows[0].shelved_until).toBeNull();
    expect((await pool.query(`SELECT count(*)::int n FROM audit_log WHERE action = 'alarm.unshelve' AND target = $1`, [`alarm:${stored.id}`])).rows[0].n).toBe(1);
    // The sign-in page's first look at the session is a 401 by design.
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
    await page.close();

    // Shelved again by the operator (through the API); an analyst reads the shelf but has no buttons.
    const op = env.server.credentials.find((c) => c.role === 'operator')!;
    const login = await fetch(`${env.server.url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: JSON.stringify({ email: op.email, password: op.password }) });
    const cookie = login.headers.get('set-cookie')!.split(';')[0]!;
    const shelved = await fetch(`${env.server.url}/api/v1/alarms/${stored.id}/shelve`, {
      method: 'POST',
      headers: { 'Content-Type': 'application/json', Cookie: cookie, Origin: env.server.url },
      body: JSON.stringify({ minutes: 30, reason: 'instrument technician on site' }),
    });
    expect(shelved.status).toBe(200);
    const analyst = env.server.credentials.find((c) => c.role === 'analyst')!;
    const viewer = await b.browser.newPage({ viewport: { width: 1920, height: 1080 } });
    const viewerErrors = watchConsole(viewer);
    await signIn(viewer, `${env.server.url}/alarms`, analyst, /\/alarms$/);
    const vrow = viewer.getByTestId('active-alarms').locator('tr[data-rule="blanket-high"]');
    await vrow.waitFor();
    expect(await vrow.innerText()).toMatch(/SHELVED/);
    expect(await vrow.innerText()).toContain('until');
    expect(await viewer.getByRole('button', { name: /^(Shelve|Unshelve) / }).count()).toBe(0);
    expect(await vrow.getByTestId('shelve-reason').innerText()).toContain('instrument technician on site');
    expect(await viewer.evaluate(() => document.documentElement.scrollWidth - window.innerWidth)).toBeLessThanOrEqual(0);
    await shot(viewer, 'alarm-shelved-analyst');
    expect(viewerErrors.filter((e) => !/401/.test(e))).toEqual([]);
    await viewer.close();
  });
});
