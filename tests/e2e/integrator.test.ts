import path from 'node:path';
import mqtt, { type MqttClient } from 'mqtt';
import { DataType, OPCUACertificateManager, OPCUAServer, StatusCodes } from 'node-opcua';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { IngestService } from '../../ingest/ingest-service.ts';
import { seedDemoPlant } from '../helpers/plants.ts';
import { E2E_ADMIN as ADMIN, launchBrowser, shot, watchConsole, signIn } from '../helpers/browser.ts';
import { startTestServer } from '../helpers/server.ts';
import { freePort, ingestConfig, silentLog, startTestBroker, type TestBroker } from '../integration/ingest/helpers.ts';

const INTEGRATOR = { email: 'wire@kestrel.invalid', password: 'e2e-integrator-password-1', name: 'Ira Wirer' };
// A topic the plant sends but nobody has wired yet: WAS pump 1's run feedback (0/1).
const NEW_TOPIC = 'kb/was1/YI-3211';

// Kestrel Bend is our invented demo plant. The real ingest process runs in this test (in-process,
// against the test database and a real aedes broker): the topic is published by the test as the
// plant would, discovered by ingest, wired in the browser, and its values arrive through ingest.
describe('integrator in Debian Chromium: test connections, wire a new MQTT topic, import a tag list', () => {
  let env: Awaited<ReturnType<typeof startTestServer>>;
  let b: { browser: Browser; close(): Promise<void> };
  let broker: TestBroker;
  let ingest: IngestService;
  let pub: MqttClient;
  let timer: NodeJS.Timeout;
  let ua: OPCUAServer | undefined;
  const q = (text: string, values: unknown[] = []) => env.server.ctx.db.pool.query(text, values);

  beforeAll(async () => {
    broker = await startTestBroker(await freePort());
    env = await startTestServer({ FLOCSTREAM_ADMIN_EMAIL: ADMIN.email, FLOCSTREAM_ADMIN_PASSWORD: ADMIN.password });
    const login = await fetch(`${env.server.url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: JSON.stringify(ADMIN) });
    const cookie = login.headers.getSetCookie().map((c) => c.split(';')[0]).join('; ');
    const made = await fetch(`${env.server.url}/api/v1/users`, { method: 'POST', headers: { 'Content-Type': 'application/json', Cookie: cookie, Origin: env.server.url }, body: JSON.stringify({ ...INTEGRATOR, role: 'integrator' }) });
    expect(made.status).toBe(201);
    // the OPC UA endpoint points at a closed port: its connection test must say so
    await seedDemoPlant(env.server.ctx, { mqttUrl: broker.url, opcuaUrl: `opc.tcp://127.0.0.1:${await freePort()}/none` });
    ingest = await IngestService.start(ingestConfig(env.t.url, env.server.ctx.config.dataDir), silentLog);
    pub = await mqtt.connectAsync(broker.url, { clientId: 'e2e-plant', protocolVersion: 4 });
    let k = 0;
    timer = setInterval(() => {
      k++;
      void pub.publishAsync(NEW_TOPIC, JSON.stringify({ v: Math.floor(k / 6) % 2, ts: new Date().toISOString() }), { qos: 1 }).catch(() => {});
    }, 250);
  }, 120_000);
  afterAll(async () => {
    clearInterval(timer);
    await pub?.endAsync().catch(() => {});
    await ingest?.stop();
    // after ingest, whose OPC UA connector to it would otherwise be reconnecting
    await ua?.shutdown(0);
    await b?.close();
    await env?.close();
    await broker?.close();
  });

  async function openAs(page: Page, to: string): Promise<void> {
    await signIn(page, `${env.server.url}${to}`, INTEGRATOR, (u) => u.pathname === to);
  }

  it('tests both sources, discovers the new topic, maps it to a process signal and sees its values arrive', async () => {
    b = await launchBrowser();
    const page = await b.browser.newPage({ viewport: { width: 1280, height: 900 } });
    const errors = watchConsole(page);
    await openAs(page, '/wiring');
    expect(await page.getByRole('navigation', { name: 'Main' }).innerText()).toContain('Wiring');
    await expect.poll(() => page.getByTestId('ingest-state').innerText(), { timeout: 15_000 }).toBe('ingest running');

    await page.getByRole('button', { name: 'Test connection of kb-mqtt' }).click();
    const mqttRow = page.getByTestId('source-row').filter({ hasText: 'kb-mqtt' });
    await expect.poll(() => mqttRow.getByTestId('connection-result').innerText(), { timeout: 10_000 }).toMatch(/^Connection OK \(\d+ ms\)/);
    await page.getByRole('button', { name: 'Test connection of kb-opcua' }).click();
    const opcRow = page.getByTestId('source-row').filter({ hasText: 'kb-opcua' });
    await expect.poll(() => opcRow.getByTestId('connection-result').innerText(), { timeout: 15_000 }).toMatch(/^Connection failed \(\d+ ms\): .+/);
    await shot(page, 'integrator-sources');

    // ingest has seen the topic; no tag has it yet
    await page.getByRole('button', { name: 'Discover topics of kb-mqtt' }).click();
    const topicRow = page.getByTestId('topic-row').filter({ hasText: NEW_TOPIC });
    await expect.poll(() => topicRow.count(), { timeout: 15_000 }).toBe(1);
    expect(await topicRow.innerText()).toMatch(/"v":[01]/);
    await shot(page, 'integrator-discovery');
    await topicRow.getByRole('button', { name: `New tag for ${NEW_TOPIC}` }).click();

    const form = page.getByRole('form', { name: 'New tag' });
    await expect.poll(() => form.getByLabel('Address').inputValue()).toBe(NEW_TOPIC);
    // the browser checks with the server's schema first: a missing unit is refused beside its field
    await form.getByLabel(/^Tag name/).fill('YI-3211');
    await form.getByRole('button', { name: 'Add tag' }).click();
    await form.getByRole('alert').first().waitFor();
    expect(await form.getByRole('alert').allInnerTexts()).toEqual(['required']);
    await form.getByLabel(/^Unit/).fill('state');
    await form.getByLabel(/^Description/).fill('WAS pump 1 running');
    await form.getByLabel('Expected period [s]').fill('5');
    await form.getByLabel('Process signal').selectOption('pump.running');
    await form.getByLabel('Signal target').selectOption('was1');
    await form.getByRole('button', { name: 'Add tag' }).click();
    await expect.poll(() => form.getByRole('status').innerText()).toMatch(/^Tag YI-3211 added as pump\.running of was1\./);
    const cfgRow = page.getByTestId('tag-config-row').filter({ hasText: 'YI-3211' });
    await expect.poll(() => cfgRow.innerText()).toContain('pump.running · was1');
    await shot(page, 'integrator-tag-added');

    // ingest re-reads the wiring and stores the values; the Signals view shows them live
    const tagId = (await q(`SELECT id FROM tags WHERE name = 'YI-3211'`)).rows[0].id as number;
    await expect.poll(async () => Number((await q(`SELECT count(*) FROM samples WHERE tag_id = $1`, [tagId])).rows[0].count), { timeout: 15_000 }).toBeGreaterThan(3);
    await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Signals' }).click();
    await page.getByLabel('Find in name or description').fill('YI-3211');
    const row = page.getByTestId('signals-row').filter({ hasText: 'WAS pump 1 running' });
    await expect.poll(() => row.count(), { timeout: 15_000 }).toBe(1);
    await expect.poll(() => row.getByTestId('signal-value').textContent(), { timeout: 15_000 }).toMatch(/^[01]$/);
    const text = await row.innerText();
    expect(text).toContain('good');
    expect(text).toContain('pump.running · was1');
    expect(text).not.toContain('STALE');
    // it keeps changing: published at 4 Hz, the pump toggles every 1.5 s; the row follows
    const value = row.getByTestId('signal-value');
    const first = await value.textContent();
    await expect.poll(() => value.textContent(), { timeout: 15_000 }).not.toBe(first);
    expect(new Set([first, await value.textContent()])).toEqual(new Set(['0', '1']));
    await shot(page, 'integrator-signal-live');
    // the server itself logs a 401 for /auth/me before sign-in
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
    await page.close();
  });

  it('imports a tag list from CSV: preview with row errors, then all rows at once', async () => {
    const page = await b.browser.newPage({ viewport: { width: 1280, height: 900 } });
    const errors = watchConsole(page);
    await openAs(page, '/wiring');
    const panel = page.getByRole('region', { name: 'Import a tag list (CSV)' });
    const header = 'name,source,address,unit,description,scale_gain,expected_period_s,signal,target';
    const bad = [header, 'AIT-901,kb-mqtt,kb/aux/AIT-901,mg/L,Aux effluent TSS,1,10,,', 'AIT-902,nowhere,kb/aux/AIT-902,mg/L,Aux TSS 2,abc,10,,', ''].join('\r\n');
    await panel.getByLabel('Tag list CSV file').setInputFiles({ name: 'aux-tags.csv', mimeType: 'text/csv', buffer: Buffer.from(bad) });
    await expect.poll(() => panel.getByTestId('import-summary').innerText()).toMatch(/: 1 row with errors/);
    const line3 = panel.getByTestId('import-row').and(page.locator('[data-line="3"]'));
    const problems = await line3.innerText();
    expect(problems).toContain('ERROR');
    expect(problems).toMatch(/source: no source "nowhere"/);
    expect(await panel.getByTestId('import-row').and(page.locator('[data-line="2"]')).innerText()).toMatch(/ok$/);
    expect(await panel.getByRole('button', { name: /^Import/ }).isDisabled()).toBe(true);
    await shot(page, 'integrator-import-errors');
    expect(Number((await q(`SELECT count(*) FROM tags WHERE name LIKE 'AIT-90%'`)).rows[0].count)).toBe(0);

    const good = [header, 'AIT-901,kb-mqtt,kb/aux/AIT-901,mg/L,Aux effluent TSS,1,10,,', 'AIT-902,kb-mqtt,kb/aux/AIT-902,mg/L,Aux TSS 2,0.001,10,,', ''].join('\r\n');
    await panel.getByLabel('Tag list CSV file').setInputFiles({ name: 'aux-tags.csv', mimeType: 'text/csv', buffer: Buffer.from(good) });
    await expect.poll(() => panel.getByTestId('import-summary').innerText()).toMatch(/2 rows, all valid/);
    await panel.getByRole('button', { name: 'Import 2 tags' }).click();
    await expect.poll(() => panel.getByTestId('import-summary').innerText()).toBe('Imported 2 tags.');
    const stored = await q(`SELECT name, scale_gain FROM tags WHERE name LIKE 'AIT-90%' ORDER BY name`);
    expect(stored.rows).toEqual([
      { name: 'AIT-901', scale_gain: 1 },
      { name: 'AIT-902', scale_gain: 0.001 },
    ]);
    await page.getByLabel('Filter tags').fill('AIT-90');
    await expect.poll(() => page.getByTestId('tag-config-row').count()).toBe(2);
    await shot(page, 'integrator-imported');
    expect(await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth)).toBeLessThanOrEqual(0);
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
    await page.close();
  });
  it('adds an OPC UA source from the form, tests it, browses its address space and makes a tag of a variable', async () => {
    // a small OPC UA server of our own (Works/Basin9/MLSS), as the wiring API test uses
    const pki = path.join(env.server.ctx.config.dataDir, 'pki', 'e2e-server');
    const port = await freePort();
    ua = new OPCUAServer({
      port,
      host: '127.0.0.1',
      hostname: '127.0.0.1',
      resourcePath: '/e2e',
      serverCertificateManager: new OPCUACertificateManager({ rootFolder: path.join(pki, 'server'), automaticallyAcceptUnknownCertificate: true }),
      userCertificateManager: new OPCUACertificateManager({ rootFolder: path.join(pki, 'user'), automaticallyAcceptUnknownCertificate: true }),
    });
    await ua.initialize();
    const ns = ua.engine.addressSpace!.getOwnNamespace();
    const folder = ns.addFolder(ua.engine.addressSpace!.rootFolder.objects, { browseName: 'Works', nodeId: 's=Works' });
    const basin = ns.addObject({ organizedBy: folder, browseName: 'Basin9', nodeId: 's=Works.Basin9' });
    const mlss = ns.addVariable({ componentOf: basin, browseName: 'MLSS', nodeId: 's=Works.Basin9.MLSS', dataType: 'Double', minimumSamplingInterval: 100 });
    mlss.setValueFromSource({ dataType: DataType.Double, value: 3.1 }, StatusCodes.Good);
    await ua.start();
    {
      const page = await b.browser.newPage({ viewport: { width: 1280, height: 900 } });
      const errors = watchConsole(page);
      await openAs(page, '/wiring');
      await page.getByRole('button', { name: 'Add source…' }).click();
      const sf = page.getByRole('form', { name: 'New source' });
      await sf.getByLabel('Kind').selectOption('opcua');
      await sf.getByLabel(/^Name/).fill('kb-ua-e2e');
      // a wrong scheme is refused by the server beside the field
      await sf.getByLabel(/^URL/).fill(`mqtt://127.0.0.1:${port}`);
      await sf.getByRole('button', { name: 'Add source' }).click();
      await expect.poll(() => sf.getByRole('alert').first().innerText()).toMatch(/opc\.tcp:\/\//);
      errors.length = 0; // the browser logs the deliberate 422 as a failed resource
      await sf.getByLabel(/^URL/).fill(`opc.tcp://127.0.0.1:${port}/e2e`);
      await sf.getByRole('button', { name: 'Add source' }).click();
      await page.getByRole('button', { name: 'Test connection of kb-ua-e2e' }).click();
      const row = page.getByTestId('source-row').filter({ hasText: 'kb-ua-e2e' });
      await expect.poll(() => row.getByTestId('connection-result').innerText(), { timeout: 15_000 }).toMatch(/^Connection OK/);

      await page.getByRole('button', { name: 'Browse kb-ua-e2e' }).click();
      const tree = page.getByRole('tree', { name: 'Address space of kb-ua-e2e' });
      await tree.getByRole('button', { name: 'Expand Works' }).click({ timeout: 15_000 });
      await tree.getByRole('button', { name: 'Expand Basin9' }).click({ timeout: 15_000 });
      // tree items nest, so the innermost one holding the NodeId is the variable itself
      const item = tree.getByRole('treeitem').filter({ hasText: 'ns=1;s=Works.Basin9.MLSS' }).last();
      await expect.poll(() => item.innerText()).toContain('Double');
      await shot(page, 'integrator-opcua-browse');
      await item.getByRole('button', { name: 'New tag for MLSS' }).click();
      const form = page.getByRole('form', { name: 'New tag' });
      await expect.poll(() => form.getByLabel('Address').inputValue()).toBe('ns=1;s=Works.Basin9.MLSS');
      await expect.poll(() => form.getByLabel(/^Tag name/).inputValue()).toBe('MLSS');
      await form.getByLabel(/^Tag name/).fill('AIT-119');
      await form.getByLabel(/^Unit/).fill('g/L');
      await form.getByLabel('Range low').fill('0');
      await form.getByLabel('Range high').fill('12');
      await form.getByRole('button', { name: 'Add tag' }).click();
      await expect.poll(() => form.getByRole('status').innerText()).toMatch(/^Tag AIT-119 added\./);
      const stored = await q(`SELECT t.address, t.unit, t.range_high, s.name FROM tags t JOIN sources s ON s.id = t.source_id WHERE t.name = 'AIT-119'`);
      expect(stored.rows).toEqual([{ address: 'ns=1;s=Works.Basin9.MLSS', unit: 'g/L', range_high: 12, name: 'kb-ua-e2e' }]);
      expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
      await page.close();
    }
  }, 60_000);
});
