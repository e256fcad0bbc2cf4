import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { E2E_ADMIN as ADMIN, launchBrowser, shot, signIn, watchConsole } from '../helpers/browser.ts';
import { startTestServer } from '../helpers/server.ts';

const INTEGRATOR = { email: 'setup@heron.invalid', password: 'e2e-integrator-password-2', name: 'Sam Setter' };

// From a database with no plant: an integrator describes an invented plant ("Heron Flats", two
// trains) in the setup view alone, then takes a clarifier out of service.
describe('integrator in Debian Chromium: describe a plant from an empty database', () => {
  let env: Awaited<ReturnType<typeof startTestServer>>;
  let b: { browser: Browser; close(): Promise<void> };

  beforeAll(async () => {
    env = await startTestServer({ FLOCSTREAM_ADMIN_EMAIL: ADMIN.email, FLOCSTREAM_ADMIN_PASSWORD: ADMIN.password });
    const login = await fetch(`${env.server.url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: JSON.stringify(ADMIN) });
    const cookie = login.headers.getSetCookie().map((c) => c.split(';')[0]).join('; ');
    const made = await fetch(`${env.server.url}/api/v1/users`, { method: 'POST', headers: { 'Content-Type': 'application/json', Cookie: cookie, Origin: env.server.url }, body: JSON.stringify({ ...INTEGRATOR, role: 'integrator' }) });
    expect(made.status).toBe(201);
    b = await launchBrowser();
  }, 120_000);
  afterAll(async () => {
    await b?.close();
    await env?.close();
  });

  async function addUnit(page: Page, kind: string, fill: Record<string, string>, select: Record<string, string> = {}) {
    const form = page.getByRole('form', { name: `New ${kind}` });
    for (const [label, value] of Object.entries(select)) await form.getByLabel(label).selectOption({ label: value });
    for (const [label, value] of Object.entries(fill)) await form.getByLabel(label, { exact: false }).fill(value);
    await form.getByRole('button', { name: `Add ${kind}` }).click();
    // The form is cleared once the server has answered 201.
    await expect.poll(() => form.getByLabel('Code').inputValue(), { timeout: 15_000 }).toBe('');
  }

  it('creates the plant, two trains, basins, clarifiers and pumps; the needs follow the model', async () => {
    const page = await b.browser.newPage({ viewport: { width: 1500, height: 1100 } });
    const errors = watchConsole(page);
    await signIn(page, `${env.server.url}/setup`, INTEGRATOR, (u) => u.pathname === '/setup');
    await page.getByText('No plant yet').waitFor();

    const plant = page.getByRole('form', { name: 'New plant' });
    await plant.getByLabel('Code').fill('hf');
    await plant.getByLabel('Name').fill('Heron Flats');
    await plant.getByLabel('Time zone').fill('UTC');
    await plant.getByLabel('Peak wet-weather flow').fill('-5');
    await plant.getByRole('button', { name: 'Create plant' }).click();
    // The contract refuses a negative peak flow beside the field, before anything is sent.
    await plant.getByRole('alert').first().waitFor();
    await plant.getByLabel('Peak wet-weather flow').fill('3200');
    await plant.getByRole('button', { name: 'Create plant' }).click();
    await page.getByText('Heron Flats (hf)').waitFor();

    for (const t of ['t1', 't2']) await addUnit(page, 'train', { Code: t, Name: `Train ${t.slice(1)}` });
    for (const [t, n] of [['t1', '1'], ['t2', '2']] as const) {
      await addUnit(page, 'basin', { Code: `ab${n}`, Name: `Basin ${n}`, Volume: '6000' }, { Train: t });
      await addUnit(page, 'clarifier', { Code: `sc${n}`, Name: `Clarifier ${n}`, 'Area (each)': '1500', 'Side water depth': '4' }, { Train: t });
      await addUnit(page, 'pump', { Code: `ras${n}`, Name: `RAS ${n}`, Capacity: '850' }, { Kind: 'RAS', 'Serves clarifier': `sc${n}` });
      await addUnit(page, 'pump', { Code: `was${n}`, Name: `WAS ${n}`, Capacity: '60' }, { Kind: 'WAS', 'Serves clarifier': `sc${n}` });
    }
    await expect.poll(() => page.getByTestId('clarifier-table').locator('tbody tr[data-code]').count()).toBe(2);
    expect(await page.getByTestId('pump-table').locator('tbody tr[data-code]').count()).toBe(4);
    // Nothing is mapped yet: every figure says which signals it waits for.
    await expect.poll(() => page.getByTestId('figure-needs').textContent()).toContain('storm projection of train t2 needs');
    expect(await page.getByTestId('figure-needs').textContent()).not.toContain('clarifier area');
    await shot(page, 'setup-model');

    // Clarifier 2 out of service from now: train 2's storm projection now lacks a clarifier area.
    await page.getByRole('button', { name: 'Edit sc2' }).click();
    const edit = page.getByRole('form', { name: 'Edit sc2' });
    await edit.getByLabel('In service').uncheck();
    await edit.getByRole('button', { name: 'Save sc2' }).click();
    await page.getByTestId('clarifier-table').locator('tr[data-code="sc2"]').getByText('out of service').waitFor();
    await expect.poll(() => page.getByTestId('figure-needs').textContent()).toContain('storm projection of train t2 needs a clarifier area');
    await shot(page, 'setup-clarifier-out');

    const model = await env.server.ctx.db.pool.query(`SELECT c.code, v.in_service FROM clarifier_versions v JOIN clarifiers c ON c.id = v.clarifier_id ORDER BY c.code, v.effective_from`);
    expect(model.rows).toEqual([
      { code: 'sc1', in_service: true },
      { code: 'sc2', in_service: true },
      { code: 'sc2', in_service: false },
    ]);
    // The sign-in page's probe of the session answers 401 before signing in.
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
  }, 120_000);
});
