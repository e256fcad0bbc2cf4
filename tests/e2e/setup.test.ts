import path from 'node:path';
import { OPCUACertificateManager, OPCUAServer } from 'node-opcua';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startBalanceEngine, type BalanceEngine } from '../../server/jobs/balance-engine.ts';
import type { SignalKindName } from '../../shared/contracts/plant-layout.ts';
import { E2E_ADMIN as ADMIN, launchBrowser, shot, signIn, watchConsole } from '../helpers/browser.ts';
import { startTestServer } from '../helpers/server.ts';
import { writeSignals } from '../integration/balance-fixture.ts';
import { freePort, startTestBroker, type TestBroker } from '../integration/ingest/helpers.ts';

const INTEGRATOR = { email: 'setup@heron.invalid', password: 'e2e-integrator-password-2', name: 'Sam Setter' };

/**
 * Per train the signals the balance reads (shared/domain/figure-needs.ts), at the steady values of
 * the balance fixture whose hand computation is in tests/unit/domain/balance-assemble.test.ts:
 * Q 800 m³/h, MLSS 3.0 g/L, blanket 1.0 m, underflow 8.0 g/L, effluent 10 mg/L, Q_R 600, Q_W 20.
 * Train 1 arrives by MQTT topics, train 2 by OPC UA NodeIds.
 */
interface TagRow {
  name: string;
  source: string;
  address: string;
  unit: string;
  signal: SignalKindName;
  target: string;
  value: number;
}
const TAGS: TagRow[] = ['1', '2'].flatMap((n) => {
  const source = n === '1' ? 'hf-mqtt' : 'hf-ua';
  const at = (x: string) => (n === '1' ? `hf/t1/${x}` : `ns=1;s=HF.T2.${x}`);
  const rows: Array<Omit<TagRow, 'source' | 'address'>> = [
    { name: `FIT-${n}11`, unit: 'm3/h', signal: 'basin.influentFlow', target: `ab${n}`, value: 800 },
    { name: `AIT-${n}11`, unit: 'g/L', signal: 'basin.mlss', target: `ab${n}`, value: 3.0 },
    { name: `LIT-${n}21`, unit: 'm', signal: 'clarifier.blanketLevel', target: `sc${n}`, value: 1.0 },
    { name: `AIT-${n}22`, unit: 'g/L', signal: 'clarifier.underflowTss', target: `sc${n}`, value: 8.0 },
    { name: `AIT-${n}23`, unit: 'mg/L', signal: 'clarifier.effluentTss', target: `sc${n}`, value: 10 },
    { name: `FIT-${n}31`, unit: 'm3/h', signal: 'pump.flow', target: `ras${n}`, value: 600 },
    { name: `FIT-${n}32`, unit: 'm3/h', signal: 'pump.flow', target: `was${n}`, value: 20 },
  ];
  return rows.map((t) => ({ ...t, source, address: at(t.name) }));
});

// From a database with no plant: an integrator describes an invented plant ("Heron Flats", two
// trains) in the setup view, wires an OPC UA server and an MQTT broker started here in the wiring
// view, sees a good balance on the board, then takes a clarifier out of service.
describe('integrator in Debian Chromium: describe a plant from an empty database', () => {
  let env: Awaited<ReturnType<typeof startTestServer>>;
  let b: { browser: Browser; close(): Promise<void> };
  let broker: TestBroker;
  let ua: OPCUAServer;
  let uaUrl: string;
  let engine: BalanceEngine;
  const q = (text: string, values: unknown[] = []) => env.server.ctx.db.pool.query(text, values);
  const plantId = async () => (await q(`SELECT id FROM plants WHERE code = 'hf'`)).rows[0].id as number;

  beforeAll(async () => {
    broker = await startTestBroker(await freePort());
    env = await startTestServer({ FLOCSTREAM_ADMIN_EMAIL: ADMIN.email, FLOCSTREAM_ADMIN_PASSWORD: ADMIN.password }, { jobs: false });
    engine = await startBalanceEngine(env.server.ctx, { schedule: false, mailCatcher: false });
    // A small OPC UA server of our own, as the integrator e2e test starts one.
    const pki = path.join(env.server.ctx.config.dataDir, 'pki', 'e2e-setup');
    const port = await freePort();
    ua = new OPCUAServer({
      port,
      host: '127.0.0.1',
      hostname: '127.0.0.1',
      resourcePath: '/hf',
      serverCertificateManager: new OPCUACertificateManager({ rootFolder: path.join(pki, 'server'), automaticallyAcceptUnknownCertificate: true }),
      userCertificateManager: new OPCUACertificateManager({ rootFolder: path.join(pki, 'user'), automaticallyAcceptUnknownCertificate: true }),
    });
    await ua.initialize();
    await ua.start();
    uaUrl = `opc.tcp://127.0.0.1:${port}/hf`;
    const login = await fetch(`${env.server.url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: JSON.stringify(ADMIN) });
    const cookie = login.headers.getSetCookie().map((c) => c.split(';')[0]).join('; ');
    const made = await fetch(`${env.server.url}/api/v1/users`, { method: 'POST', headers: { 'Content-Type': 'application/json', Cookie: cookie, Origin: env.server.url }, body: JSON.stringify({ ...INTEGRATOR, role: 'integrator' }) });
    expect(made.status).toBe(201);
    b = await launchBrowser();
  }, 120_000);
  afterAll(async () => {
    await b?.close();
    await engine?.stop();
    await ua?.shutdown(0);
    await env?.close();
    await broker?.close();
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
    // The design storm setting is a list: shown as its points, wrapped inside the settings table
    // rather than running past the panel.
    const settingsTable = page.getByRole('table', { name: 'Settings' });
    const hydrograph = settingsTable.locator('tr[data-key="storm.hydrograph"]');
    await expect.poll(() => hydrograph.textContent()).toContain('0\u00a0h\u00a01 · 6\u00a0h\u00a01 · 6\u00a0h\u00a00 · 12\u00a0h\u00a00');
    await hydrograph.scrollIntoViewIfNeeded();
    await shot(page, 'setup-settings');
    expect(await settingsTable.evaluate((t) => t.scrollWidth <= t.parentElement!.clientWidth + 1)).toBe(true);

    // The sign-in page's probe of the session answers 401 before signing in.
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
  }, 120_000);

  it('adds an OPC UA and an MQTT source in the wiring view, maps every signal the balance needs, enters an SVI and sees a good balance', async () => {
    const page = await b.browser.newPage({ viewport: { width: 1500, height: 1100 } });
    const errors = watchConsole(page);
    await signIn(page, `${env.server.url}/wiring`, INTEGRATOR, (u) => u.pathname === '/wiring');
    // The source form stays open after each source it adds.
    await page.getByRole('button', { name: 'Add source…' }).click();
    for (const [kind, name, url] of [['opcua', 'hf-ua', uaUrl], ['mqtt', 'hf-mqtt', broker.url]] as const) {
      const sf = page.getByRole('form', { name: 'New source' });
      await sf.getByLabel('Kind').selectOption(kind);
      await sf.getByLabel(/^Name/).fill(name);
      await sf.getByLabel(/^URL/).fill(url);
      await sf.getByRole('button', { name: 'Add source' }).click();
      await page.getByRole('button', { name: `Test connection of ${name}` }).click();
      const row = page.getByTestId('source-row').filter({ hasText: name });
      await expect.poll(() => row.getByTestId('connection-result').innerText(), { timeout: 20_000 }).toMatch(/^Connection OK/);
    }
    await shot(page, 'setup-sources');

    // Train 1 reads MQTT topics, train 2 OPC UA nodes of the test server: the signals the balance
    // needs per train (shared/domain/figure-needs.ts), effluent TSS included for the SRT.
    const form = page.getByRole('form', { name: 'New tag' });
    for (const tag of TAGS) {
      await form.getByLabel('Source').selectOption({ label: tag.source });
      await form.getByLabel('Address').fill(tag.address);
      await form.getByLabel(/^Tag name/).fill(tag.name);
      await form.getByLabel(/^Unit/).fill(tag.unit);
      await form.getByLabel('Process signal').selectOption(tag.signal);
      await form.getByLabel('Signal target').selectOption(tag.target);
      await form.getByRole('button', { name: 'Add tag' }).click();
      await expect.poll(() => form.getByRole('status').innerText(), { timeout: 15_000 }).toContain(`Tag ${tag.name} added as ${tag.signal} of ${tag.target}.`);
    }
    await shot(page, 'setup-tags');

    // The setup view now finds every signal mapped.
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Setup' }).click();
    await page.getByText('Every figure of every train has its geometry and mapped signals').waitFor({ timeout: 15_000 });
    expect(await page.getByTestId('figure-needs').locator('li').count()).toBe(0);

    // Values: written straight into tag_latest and 24 h of minute rollups of the tags mapped above
    // (as tests/integration/balance-fixture.ts does), not through ingest: a steady day of history
    // is what makes the SRT window and the balance quality good.
    const tagIds = Object.fromEntries((await q(`SELECT name, id FROM tags WHERE plant_id = $1`, [await plantId()])).rows.map((r) => [r.name, r.id]));
    expect(Object.keys(tagIds).sort()).toEqual(TAGS.map((t) => t.name).sort());
    await writeSignals(env.server.ctx, tagIds, Object.fromEntries(TAGS.map((t) => [t.name, t.value])));

    // The SVI from the lab view: 240 mL/L settled at 3.0 g/L = SVI 80 mL/g (definition of the SVI, Standard Methods 2710 D).
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Lab' }).click();
    const lab = page.getByRole('form', { name: 'Lab result' });
    await lab.getByLabel('Settled volume (30 min) [mL/L]').fill('240');
    await lab.getByLabel('MLSS, undiluted sample [g/L]').fill('3.0');
    await lab.getByLabel('Location').selectOption('ab1');
    await lab.getByRole('button', { name: 'Save result' }).click();
    await expect.poll(() => lab.getByTestId('lab-saved').innerText()).toMatch(/Saved: SVI 80(\.0)? mL\/g/);

    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Board' }).click();
    await page.getByTestId('stream-state').filter({ hasText: 'live' }).waitFor();
    await engine.runOnce(await plantId());
    await expect.poll(() => page.getByTestId('balance-stamp').innerText(), { timeout: 15_000 }).toMatch(/quality\s+good/);
    for (const t of ['t1', 't2']) {
      const checks = page.getByTestId(`train-${t}`).getByTestId('storm-checks');
      await expect.poll(() => checks.locator('li').count()).toBe(3);
    }
    await shot(page, 'setup-board-good');
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
    await page.close();
  }, 180_000);

  it('takes clarifier sc2 out of service in the setup view; the needs and the stored versions follow', async () => {
    const page = await b.browser.newPage({ viewport: { width: 1500, height: 1100 } });
    const errors = watchConsole(page);
    await signIn(page, `${env.server.url}/setup`, INTEGRATOR, (u) => u.pathname === '/setup');
    await page.getByRole('button', { name: 'Edit sc2' }).click();
    const edit = page.getByRole('form', { name: 'Edit sc2' });
    await edit.getByLabel('In service').uncheck();
    await edit.getByRole('button', { name: 'Save sc2' }).click();
    await page.getByTestId('clarifier-table').locator('tr[data-code="sc2"]').getByText('out of service').waitFor();
    await expect.poll(() => page.getByTestId('figure-needs').textContent()).toContain('storm projection of train t2 needs a clarifier area');
    await shot(page, 'setup-clarifier-out');

    const model = await q(`SELECT c.code, v.in_service FROM clarifier_versions v JOIN clarifiers c ON c.id = v.clarifier_id ORDER BY c.code, v.effective_from`);
    expect(model.rows).toEqual([
      { code: 'sc1', in_service: true },
      { code: 'sc2', in_service: true },
      { code: 'sc2', in_service: false },
    ]);

    // A balance describes the plant clock (the newest sample time) with the geometry that held
    // then, so the values written before the edit still see sc2 in service. New values after the
    // edit move the plant clock past it: train 2 has no clarifier area left and its storm
    // projection is unavailable with that reason, while train 1's is unchanged.
    const tagIds = Object.fromEntries((await q(`SELECT name, id FROM tags WHERE plant_id = $1`, [await plantId()])).rows.map((r) => [r.name, r.id]));
    await writeSignals(env.server.ctx, tagIds, Object.fromEntries(TAGS.map((t) => [t.name, t.value])), { at: new Date(Date.now() + 2000) });
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Board' }).click();
    await page.getByTestId('stream-state').filter({ hasText: 'live' }).waitFor();
    await engine.runOnce(await plantId());
    await expect.poll(() => page.getByTestId('train-t2').getByTestId('storm-checks').locator('li').count(), { timeout: 15_000 }).toBe(0);
    expect(await page.getByTestId('train-t1').getByTestId('storm-checks').locator('li').count()).toBe(3);
    const latest = await q(`SELECT data FROM balances WHERE plant_id = $1 ORDER BY ts DESC LIMIT 1`, [await plantId()]);
    const t2 = latest.rows[0].data.trains.find((t: { code: string }) => t.code === 't2');
    expect(t2.storm.equilibriumMlss_gL.quality).toBe('unavailable');
    await shot(page, 'setup-board-clarifier-out');

    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
    await page.close();
  }, 120_000);
});
