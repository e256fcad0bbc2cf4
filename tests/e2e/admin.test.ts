import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it, onTestFailed } from 'vitest';
import { startBalanceEngine, type BalanceEngine } from '../../server/jobs/balance-engine.ts';
import { seedDemoPlant } from '../helpers/plants.ts';
import { services } from '../../server/app-context.ts';
import { startTestServer } from '../helpers/server.ts';
import { E2E_ADMIN as ADMIN, launchBrowser, shot, watchConsole, signIn } from '../helpers/browser.ts';

// A new shift operator at our invented plant Kestrel Bend.
const NEW_USER = { email: 'wren.alder@kestrel.invalid', name: 'Wren Alder', password: 'kestrel-night-shift-7' };


describe('admin in Debian Chromium', () => {
  let env: Awaited<ReturnType<typeof startTestServer>>;
  let b: { browser: Browser; close(): Promise<void> };
  let engine: BalanceEngine;
  let plantId: number;
  beforeAll(async () => {
    env = await startTestServer({ FLOCSTREAM_ADMIN_EMAIL: ADMIN.email, FLOCSTREAM_ADMIN_PASSWORD: ADMIN.password }, { jobs: false });
    ({ plantId } = await seedDemoPlant(env.server.ctx, { mqttUrl: 'mqtt://127.0.0.1:1', opcuaUrl: 'opc.tcp://127.0.0.1:2' }));
    // The product's own SMTP catcher on a free port: what the engine mails lands in mail_outbox.
    engine = await startBalanceEngine(env.server.ctx, { schedule: false, catcherPort: 0 });
    b = await launchBrowser();
  });
  afterAll(async () => {
    await b?.close();
    await engine?.stop();
    await env?.close();
  });

  it('creates a user in Access, reads the mail sent to them in the Outbox, and the new operator cannot open the Outbox', async () => {
    const page = await b.browser.newPage({ viewport: { width: 1920, height: 1080 } });
    const errors = watchConsole(page);
    // On failure, keep the screen as it was and what the console said, for the report.
    onTestFailed(async () => {
      await shot(page, 'admin-failed');
      console.error('console errors at failure:', errors);
    });
    await signIn(page, `${env.server.url}/`, ADMIN, /\/board$/);
    await page.getByTestId('no-balance').waitFor();
    // Leave the board only once its stream is subscribed: a stream request that closes while the
    // server is still checking the plant leaks its LISTEN connection (reported; server/services/stream.service.ts).
    await page.getByTestId('stream-state').filter({ hasText: 'live' }).waitFor();
    const nav = page.getByRole('navigation', { name: 'Main' });
    expect(await nav.innerText()).toMatch(/Board\s+Alarms[\s\S]*Lab[\s\S]*Access\s+Outbox/);

    // Outbox before anything was sent
    await nav.getByRole('link', { name: 'Outbox' }).click();
    await page.waitForURL(/\/outbox$/);
    await page.getByText('No message has been caught yet.').waitFor();

    // Access: create the user
    await nav.getByRole('link', { name: 'Access' }).click();
    const form = page.getByRole('form', { name: 'New user' });
    await form.getByLabel('E-mail').fill(NEW_USER.email);
    await form.getByLabel('Name').fill(NEW_USER.name);
    await form.getByLabel('Role').selectOption('operator');
    await form.getByLabel('Initial password').fill(NEW_USER.password);
    await form.getByRole('button', { name: 'Create user' }).click();
    await page.getByRole('status').filter({ hasText: `User ${NEW_USER.email} created.` }).waitFor();
    const row = await env.server.ctx.db.pool.query('SELECT name, role FROM users WHERE email = $1', [NEW_USER.email]);
    expect(row.rows).toEqual([{ name: NEW_USER.name, role: 'operator' }]);
    await shot(page, 'admin-user-created');

    // The new operator gets the shift summary; the engine mails it to the catcher.
    await services(env.server.ctx).settings.put(null, { plantId, values: { 'mail.recipients': [NEW_USER.email] } });
    expect(await engine.shiftSummary(plantId)).toBe(true);

    await nav.getByRole('link', { name: 'Outbox' }).click();
    const list = page.getByTestId('outbox-list');
    await list.waitFor({ timeout: 20_000 });
    const item = list.getByRole('button').first();
    expect(await item.innerText()).toContain('[Flocstream] Kestrel Bend Water Reclamation Plant: shift summary');
    expect(await item.innerText()).toContain(`to ${NEW_USER.email}`);
    await item.click();
    const reader = page.getByTestId('outbox-reader');
    await reader.waitFor();
    const text = await reader.innerText();
    expect(text).toMatch(new RegExp(`To\\s+${NEW_USER.email.replace('.', '\\.')}`));
    expect(text).toContain('Shift summary for Kestrel Bend Water Reclamation Plant');
    expect(text).toContain('No balance was computed in this period');
    await shot(page, 'admin-outbox');
    await page.getByRole('button', { name: 'Show raw' }).click();
    expect(await reader.innerText()).toMatch(/Subject: \[Flocstream\]/);
    await page.getByRole('button', { name: 'Show text' }).click();

    // Setup: the design storm is edited as JSON in a box that wraps, and a change is saved.
    await nav.getByRole('link', { name: 'Setup' }).click();
    const settingsTable = page.getByRole('table', { name: 'Settings' });
    const hydrograph = settingsTable.getByLabel('storm.hydrograph');
    await hydrograph.waitFor();
    expect(await settingsTable.evaluate((t) => t.scrollWidth <= t.parentElement!.clientWidth + 1)).toBe(true);
    const storm = [{ t_h: 0, peakFraction: 1 }, { t_h: 4, peakFraction: 1 }, { t_h: 4, peakFraction: 0 }, { t_h: 8, peakFraction: 0 }];
    await hydrograph.fill(JSON.stringify(storm));
    await settingsTable.locator('tr[data-key="storm.hydrograph"]').getByRole('button', { name: 'Save' }).click();
    await expect.poll(async () => (await services(env.server.ctx).settings.describe(null, plantId)).settings.find((x) => x.key === 'storm.hydrograph')?.value).toEqual(storm);
    await hydrograph.scrollIntoViewIfNeeded();
    await shot(page, 'admin-settings');
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);

    // The new operator signs in with the initial password; Outbox is not in the navigation and the server refuses it.
    await page.getByRole('button', { name: 'Sign out' }).click();
    await page.waitForURL(/\/login$/);
    await signIn(page, `${env.server.url}/outbox`, NEW_USER, /\/outbox$/);
    expect(await page.getByTestId('whoami').innerText()).toContain(`${NEW_USER.email} · operator`);
    const opNav = await page.getByRole('navigation', { name: 'Main' }).innerText();
    expect(opNav).toContain('Lab');
    expect(opNav).not.toContain('Outbox');
    await page.getByRole('alert').first().waitFor();
    expect(await page.getByRole('alert').first().innerText()).toMatch(/admin/i);
    await shot(page, 'outbox-refused-for-operator');
    expect(errors.filter((e) => !/401|403/.test(e))).toEqual([]);
  });
});
