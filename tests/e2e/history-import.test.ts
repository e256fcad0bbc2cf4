import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it, onTestFailed } from 'vitest';
import { seedDemoPlant } from '../helpers/plants.ts';
import { startTestServer } from '../helpers/server.ts';
import { E2E_ADMIN as ADMIN, launchBrowser, shot, signIn, watchConsole } from '../helpers/browser.ts';

const INTEGRATOR = { email: 'hist@kestrel.invalid', password: 'e2e-integrator-password-2', name: 'Hale Storen' };
const MIN = 60_000;
const HOUR = 3_600_000;

/**
 * The history import panel of the wiring view, as an integrator at our invented plant Kestrel
 * Bend uses it: a historian export of two hours of the plant's influent flow (FIT-101, one value
 * a minute) with one bad line is checked, the error names that line, the fixed file is checked
 * again and imported, and the stored samples are the file's.
 */
describe('integrator in Debian Chromium: import a historian CSV in the wiring view', () => {
  let env: Awaited<ReturnType<typeof startTestServer>>;
  let b: { browser: Browser; close(): Promise<void> };
  let plantId: number;
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-e2e-history-'));
  const q = (text: string, values: unknown[] = []) => env.server.ctx.db.pool.query(text, values);

  beforeAll(async () => {
    env = await startTestServer({ FLOCSTREAM_ADMIN_EMAIL: ADMIN.email, FLOCSTREAM_ADMIN_PASSWORD: ADMIN.password });
    const login = await fetch(`${env.server.url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: JSON.stringify(ADMIN) });
    const cookie = login.headers.getSetCookie().map((c) => c.split(';')[0]).join('; ');
    const made = await fetch(`${env.server.url}/api/v1/users`, { method: 'POST', headers: { 'Content-Type': 'application/json', Cookie: cookie, Origin: env.server.url }, body: JSON.stringify({ ...INTEGRATOR, role: 'integrator' }) });
    expect(made.status).toBe(201);
    ({ plantId } = await seedDemoPlant(env.server.ctx, { mqttUrl: 'mqtt://127.0.0.1:1', opcuaUrl: 'opc.tcp://127.0.0.1:2' }));
    b = await launchBrowser();
  }, 120_000);
  afterAll(async () => {
    await b?.close();
    await env?.close();
    fs.rmSync(dir, { recursive: true, force: true });
  });

  it('checks a file with a bad line, shows its line number, imports the fixed file and shows what was stored', async () => {
    const page = await b.browser.newPage({ viewport: { width: 1280, height: 1000 } });
    const errors = watchConsole(page);
    onTestFailed(async () => {
      await shot(page, 'history-import-failed');
      console.error('console errors at failure:', errors);
    });
    // Two hours of FIT-101 (m³/h) at one minute, three days ago, as a historian exports it.
    const t0 = Math.floor((Date.now() - 3 * 24 * HOUR) / HOUR) * HOUR;
    const lines = ['tag,ts,value'];
    for (let i = 0; i < 120; i++) lines.push(`FIT-101,${new Date(t0 + i * MIN).toISOString()},${1500 + (i % 10)}`);
    const bad = [...lines];
    // Line 8 of the file (the header is line 1): a decimal comma, which the import refuses rather than guesses.
    bad[7] = `FIT-101,${new Date(t0 + 6 * MIN).toISOString()},"1506,5"`;
    const badFile = path.join(dir, 'kb-influent-bad.csv');
    const goodFile = path.join(dir, 'kb-influent.csv');
    fs.writeFileSync(badFile, bad.join('\n') + '\n');
    fs.writeFileSync(goodFile, lines.join('\n') + '\n');
    const tagId = (await q(`SELECT id FROM tags WHERE plant_id = $1 AND name = 'FIT-101'`, [plantId])).rows[0].id as number;
    const stored = async () => Number((await q(`SELECT count(*) AS n FROM samples WHERE tag_id = $1 AND ts >= $2 AND ts < $3`, [tagId, new Date(t0), new Date(t0 + 2 * HOUR)])).rows[0].n);

    await signIn(page, `${env.server.url}/wiring`, INTEGRATOR, (u) => u.pathname === '/wiring');
    const panel = page.getByRole('region', { name: 'Import history from a historian (CSV)' });
    await panel.scrollIntoViewIfNeeded();
    const importButton = panel.getByRole('button', { name: 'Import', exact: true });
    await expect.poll(() => importButton.isDisabled()).toBe(true);

    // The bad file: the check refuses it and names line 8.
    await panel.getByLabel('History CSV file').setInputFiles(badFile);
    await panel.getByRole('button', { name: 'Check' }).click();
    const summary = panel.getByTestId('history-summary');
    await expect.poll(() => summary.innerText(), { timeout: 30_000 }).toMatch(/1 of 120 lines refused/);
    const errorRows = panel.getByTestId('history-errors').getByRole('row');
    await expect.poll(() => errorRows.filter({ hasText: '"1506,5" is not a number' }).innerText()).toMatch(/^8\s/);
    expect(await importButton.isDisabled()).toBe(true);
    expect(await panel.getByTestId('history-next-step').innerText()).toMatch(/Check the file first/);
    await shot(page, 'history-import-check-failed');
    expect(await stored()).toBe(0);

    // The fixed file: checked, then imported; both bars reach 100 % and the summary says what was stored.
    await panel.getByLabel('History CSV file').setInputFiles(goodFile);
    await panel.getByRole('button', { name: 'Check' }).click();
    await expect.poll(() => summary.innerText(), { timeout: 30_000 }).toMatch(/120 lines checked, all valid/);
    expect(await panel.getByTestId('history-errors').count()).toBe(0);
    await shot(page, 'history-import-check-ok');
    await expect.poll(() => importButton.isDisabled()).toBe(false);
    await importButton.click();
    await expect.poll(() => summary.innerText(), { timeout: 30_000 }).toMatch(/120 samples stored/);
    await expect.poll(() => panel.getByTestId('history-job-progress').getAttribute('aria-valuenow')).toBe('100');
    await expect.poll(() => panel.getByTestId('history-upload-progress').getAttribute('aria-valuenow')).toBe('100');
    // The balances of the window are recomputed after the import.
    await expect.poll(() => panel.getByTestId('history-recompute-progress').getAttribute('aria-valuenow'), { timeout: 60_000 }).toBe('100');
    await expect.poll(() => panel.getByTestId('history-recompute-summary').innerText()).toMatch(/^Balances recomputed for the window/);
    expect(await summary.innerText()).toContain(new Date(t0).toISOString().slice(0, 10));
    await shot(page, 'history-import-done');
    expect(await stored()).toBe(120);
    const sum = Number((await q(`SELECT sum(value) AS s FROM samples WHERE tag_id = $1 AND ts >= $2 AND ts < $3`, [tagId, new Date(t0), new Date(t0 + 2 * HOUR)])).rows[0].s);
    // 12 runs of 1500…1509: 12 × (10 × 1500 + 45) = 180 540.
    expect(sum).toBe(180_540);
    // The sign-in page's own session probe answers 401 before the sign-in; nothing else may fail.
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
  }, 180_000);
});
