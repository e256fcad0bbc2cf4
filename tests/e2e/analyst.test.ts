import fs from 'node:fs';
import path from 'node:path';
import type { Browser, BrowserContext, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseCsv } from '../../server/services/csv.service.ts';
import { seedDemoPlant } from '../helpers/plants.ts';
import { E2E_ADMIN as ADMIN, launchBrowser, SCREENSHOT_DIR, shot, watchConsole, signIn } from '../helpers/browser.ts';
import { startTestServer } from '../helpers/server.ts';

const ANALYST = { email: 'ana@kestrel.invalid', password: 'e2e-analyst-password-1', name: 'Ana Lyst' };
const BULK_TAGS = 10_000;
const H = 3_600_000;

// Kestrel Bend is our invented demo plant. History is written with SQL the way ingest stores it
// (samples + rollups + tag_latest); the bulk plant has 10 000 synthetic tags for the table.
describe('analyst in Debian Chromium: token + CSV, trends, 10 000-row signals table', () => {
  let env: Awaited<ReturnType<typeof startTestServer>>;
  let b: { browser: Browser; close(): Promise<void> };
  let kestrel: number;
  let bulk: number;
  let flow: number;
  let mlss: number;
  let bulkBad: number;
  const q = (text: string, values: unknown[] = []) => env.server.ctx.db.pool.query(text, values);

  beforeAll(async () => {
    env = await startTestServer({ FLOCSTREAM_ADMIN_EMAIL: ADMIN.email, FLOCSTREAM_ADMIN_PASSWORD: ADMIN.password });
    b = await launchBrowser();
    // the analyst is created by the admin through the API, as an admin would
    const login = await fetch(`${env.server.url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: JSON.stringify(ADMIN) });
    expect(login.status).toBe(200);
    const cookie = login.headers.getSetCookie().map((c) => c.split(';')[0]).join('; ');
    const made = await fetch(`${env.server.url}/api/v1/users`, { method: 'POST', headers: { 'Content-Type': 'application/json', Cookie: cookie, Origin: env.server.url }, body: JSON.stringify({ ...ANALYST, role: 'analyst' }) });
    expect(made.status).toBe(201);

    kestrel = (await seedDemoPlant(env.server.ctx, { mqttUrl: 'mqtt://127.0.0.1:1', opcuaUrl: 'opc.tcp://127.0.0.1:1' })).plantId;
    const id = async (name: string) => (await q(`SELECT id FROM tags WHERE plant_id = $1 AND name = $2`, [kestrel, name])).rows[0].id as number;
    flow = await id('FIT-101');
    mlss = (await q(`SELECT id FROM tags WHERE plant_id = $1 AND unit = 'g/L' ORDER BY name LIMIT 1`, [kestrel])).rows[0].id as number;
    await q(`UPDATE tags SET expected_period_s = 10 WHERE id = ANY($1)`, [[flow, mlss]]);
    // 8 days of history every 10 s up to now: influent flow with a 20 min hole 30 min ago,
    // every 40th sample uncertain (source status) and one bad sample; MLSS smooth.
    await q(
      `INSERT INTO samples (tag_id, ts, value, quality)
       SELECT $1, now() - make_interval(secs => i * 10), 1500 + 400 * sin(i / 360.0) + (i % 7) * 3, CASE WHEN i = 45 THEN 6 WHEN i % 40 = 0 THEN 5 ELSE 0 END
       FROM generate_series(0, 8 * 8640) i WHERE NOT (i BETWEEN 180 AND 300)`,
      [flow],
    );
    await q(
      `INSERT INTO samples (tag_id, ts, value, quality)
       SELECT $1, now() - make_interval(secs => i * 10), 3.2 + 0.3 * cos(i / 900.0), 0 FROM generate_series(0, 8 * 8640) i`,
      [mlss],
    );
    for (const [table, unit] of [['rollup_1m', 'minute'], ['rollup_1h', 'hour']]) {
      await q(
        `INSERT INTO ${table} (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
         SELECT tag_id, date_trunc('${unit}', ts), min(value), max(value), sum(value), count(*), (array_agg(value ORDER BY ts DESC))[1], max(ts), (bit_or(quality & ~3) | max(quality & 3))
         FROM samples WHERE tag_id = ANY($1) AND value IS NOT NULL AND (quality & 3) < 2 GROUP BY 1, 2`,
        [[flow, mlss]],
      );
    }
    await q(`INSERT INTO tag_latest (tag_id, ts, value, quality) SELECT id, now() - interval '3 seconds', 1.0 + id % 13, 0 FROM tags WHERE plant_id = $1`, [kestrel]);

    // The bulk plant: 10 000 tags on one MQTT source; every 97th bad, every 31st uncertain, every 50th never seen.
    bulk = (await q(`INSERT INTO plants (code, name) VALUES ('bulk', 'Bulk test plant') RETURNING id`)).rows[0].id as number;
    const src = (await q(`INSERT INTO sources (plant_id, name, kind, url) VALUES ($1, 'bulk-mqtt', 'mqtt', 'mqtt://127.0.0.1:1') RETURNING id`, [bulk])).rows[0].id as number;
    await q(
      `INSERT INTO tags (plant_id, source_id, name, description, address, unit, expected_period_s)
       SELECT $1, $2, 'BULK_' || lpad(i::text, 5, '0'), 'synthetic signal ' || i, 'bulk/t/' || i, 'mg/L', 10 FROM generate_series(0, ${BULK_TAGS - 1}) i`,
      [bulk, src],
    );
    await q(
      `INSERT INTO tag_latest (tag_id, ts, value, quality)
       SELECT t.id, now() - interval '2 seconds', (t.id % 1000) / 10.0, CASE WHEN n % 97 = 0 THEN 2 WHEN n % 31 = 0 THEN 1 ELSE 0 END
       FROM (SELECT id, substr(name, 6)::int AS n FROM tags WHERE plant_id = $1) t WHERE n % 50 <> 0`,
      [bulk],
    );
    bulkBad = Number((await q(`SELECT count(*) FROM tag_latest l JOIN tags t ON t.id = l.tag_id WHERE t.plant_id = $1 AND l.quality & 3 = 2`, [bulk])).rows[0].count);
  }, 120_000);
  afterAll(async () => {
    await b?.close();
    await env?.close();
  });

  async function openAs(ctx: BrowserContext, to: string): Promise<Page> {
    const page = await ctx.newPage();
    await signIn(page, `${env.server.url}${to}`, ANALYST, (u) => u.pathname === to.split('?')[0]);
    return page;
  }

  it('creates an API token and pulls tag history as CSV with it', async () => {
    const ctx = await b.browser.newContext({ viewport: { width: 1280, height: 800 } });
    const page = await openAs(ctx, '/access');
    const errors = watchConsole(page);
    await page.getByLabel('Name').fill('monthly report');
    await page.getByRole('button', { name: 'Create token' }).click();
    const token = (await page.getByTestId('new-token').innerText()).trim();
    expect(token.length).toBeGreaterThan(20);
    await shot(page, 'analyst-token');

    const from = new Date(Date.now() - H).toISOString();
    const to = new Date().toISOString();
    const url = `${env.server.url}/api/v1/plants/${kestrel}/tags/${flow}/samples?from=${encodeURIComponent(from)}&to=${encodeURIComponent(to)}`;
    expect((await fetch(`${url}&format=csv`)).status).toBe(401);
    const csvRes = await fetch(`${url}&format=csv`, { headers: { Authorization: `Bearer ${token}` } });
    expect(csvRes.status).toBe(200);
    expect(csvRes.headers.get('content-type')).toMatch(/^text\/csv/);
    const parsed = parseCsv(await csvRes.text());
    if (!parsed.ok) throw new Error(parsed.message);
    const [header, ...rows] = parsed.records.map((r) => r.fields);
    // Value columns carry the unit in the header (in the plant's unit system).
    expect(header!.map((c) => c.replace(/ \[[^\]]+\]$/, ''))).toEqual(['ts', 'value', 'min', 'max', 'count', 'quality', 'flags']);
    const json = (await (await fetch(url, { headers: { Authorization: `Bearer ${token}` } })).json()) as { resolution: string; points: { ts: string; value: number; quality: string }[] };
    expect(json.resolution).toBe('raw');
    // 1 h at 10 s minus the 20 min hole: about 240 points, same in both formats
    expect(rows.length).toBe(json.points.length);
    expect(rows.length).toBeGreaterThan(200);
    expect(rows.length).toBeLessThan(260);
    expect(rows.filter((r) => r[5] === 'bad').length).toBe(1);
    expect(Number(rows[0]![1])).toBeCloseTo(json.points[0]!.value, 9);
    // wiring is for integrators: not in the analyst's navigation, and the view says why
    expect(await page.getByRole('navigation', { name: 'Main' }).innerText()).not.toContain('Wiring');
    await page.goto(`${env.server.url}/wiring`);
    await page.getByText('Wiring needs the integrator role (you are analyst).').waitFor();
    expect(errors).toEqual([]);
    await ctx.close();
  });

  it('trends two pens: gaps and quality shown, zoom refetches, rollups for a week, CSV and PNG export', async () => {
    const ctx = await b.browser.newContext({ viewport: { width: 1280, height: 900 }, acceptDownloads: true });
    const page = await openAs(ctx, `/trends`);
    const errors = watchConsole(page);
    await page.getByRole('heading', { name: 'Trends' }).waitFor();
    // Kestrel Bend is the first plant; pens are added by name, from the keyboard
    const input = page.getByLabel('Tag to add as a pen');
    await input.fill('FIT-101');
    await input.press('Enter');
    const mlssName = (await q(`SELECT name FROM tags WHERE id = $1`, [mlss])).rows[0].name as string;
    await input.fill(mlssName);
    await page.getByRole('button', { name: 'Add pen' }).click();
    const lanes = page.getByTestId('trend-lane');
    await expect.poll(() => lanes.count()).toBe(2);
    await expect.poll(() => lanes.first().getAttribute('data-resolution')).toBe('raw');
    await expect.poll(async () => Number(await lanes.nth(1).getAttribute('data-points'))).toBeGreaterThan(300);
    const flowLane = lanes.first();
    // the 20 min hole is a gap (not bridged), the uncertain samples dash the line, the bad one is crossed
    expect(await flowLane.getByTestId('trend-gap').count()).toBeGreaterThanOrEqual(1);
    expect(await flowLane.locator('[data-testid="trend-run"][data-dashed="true"]').count()).toBeGreaterThan(0);
    expect(await flowLane.getByTestId('trend-mark-bad').count()).toBe(1);
    expect(await lanes.nth(1).getByTestId('trend-gap').count()).toBe(0);
    const svgText = await page.getByTestId('trend-chart').textContent();
    expect(svgText).toContain('m³/h');
    expect(svgText).toContain('g/L');
    await page.getByTestId('trend-overlay').hover({ position: { x: 500, y: 100 } });
    await shot(page, 'analyst-trends-1h');
    await page.getByTestId('trend-chart').screenshot({ path: path.join(SCREENSHOT_DIR, 'analyst-trend-chart.png') });

    // CSV of what is shown: every loaded point of both pens
    const shownPoints = Number(await lanes.nth(0).getAttribute('data-points')) + Number(await lanes.nth(1).getAttribute('data-points'));
    const [csvDl] = await Promise.all([page.waitForEvent('download'), page.getByRole('button', { name: 'Export CSV' }).click()]);
    const csv = parseCsv(fs.readFileSync((await csvDl.path())!, 'utf8'));
    if (!csv.ok) throw new Error(csv.message);
    const csvRows = csv.records.map((r) => r.fields);
    expect(csvRows[0]).toEqual(['tag', 'unit', 'resolution', 'step_s', 'ts', 'value', 'min', 'max', 'count', 'quality', 'flags']);
    expect(csvRows.length - 1).toBe(shownPoints);
    expect(new Set(csvRows.slice(1).map((r) => r[0]))).toEqual(new Set(['FIT-101', mlssName]));
    const [pngDl] = await Promise.all([page.waitForEvent('download'), page.getByRole('button', { name: 'Export PNG' }).click()]);
    const png = fs.readFileSync((await pngDl.path())!);
    expect(png.subarray(1, 4).toString('latin1')).toBe('PNG');
    expect(png.length).toBeGreaterThan(5000);

    // drag across a fifth of the plot: the window narrows to ~12 min and both pens ask again
    const box = (await page.getByTestId('trend-overlay').boundingBox())!;
    const before = await page.getByTestId('trend-window').innerText();
    await page.mouse.move(box.x + box.width * 0.6, box.y + 50);
    await page.mouse.down();
    await page.mouse.move(box.x + box.width * 0.8, box.y + 60, { steps: 5 });
    await page.mouse.up();
    await expect.poll(() => page.getByTestId('trend-window').innerText()).not.toBe(before);
    const sp = new URL(page.url()).searchParams;
    const span = Date.parse(sp.get('to')!) - Date.parse(sp.get('from')!);
    expect(span).toBeGreaterThan(0.15 * H);
    expect(span).toBeLessThan(0.25 * H);
    await expect.poll(async () => Number(await lanes.nth(1).getAttribute('data-points'))).toBeLessThan(110);
    await shot(page, 'analyst-trends-zoomed');
    // zoom out and pan are buttons too (keyboard reachable)
    await page.getByRole('button', { name: 'Zoom out' }).focus();
    await page.keyboard.press('Enter');
    await expect.poll(() => {
      const s = new URL(page.url()).searchParams;
      return Math.round((Date.parse(s.get('to')!) - Date.parse(s.get('from')!)) / 60_000);
    }).toBe(Math.round((2 * span) / 60_000));

    // a week: the server answers from the rollups
    await page.getByRole('button', { name: '7 d' }).click();
    await expect.poll(() => lanes.first().getAttribute('data-resolution')).toMatch(/^(1m|1h)$/);
    await expect.poll(async () => Number(await lanes.nth(1).getAttribute('data-points'))).toBeGreaterThan(100);
    await shot(page, 'analyst-trends-7d');
    expect(await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth)).toBeLessThanOrEqual(0);

    // Away to the board and back through the menu: the same pens and week come back.
    const view = new URL(page.url()).search;
    await page.getByRole('link', { name: 'Board', exact: true }).click();
    await page.getByRole('heading', { name: 'Plant board' }).waitFor();
    await page.getByRole('link', { name: 'Trends', exact: true }).click();
    await expect.poll(() => new URL(page.url()).search).toBe(view);
    await expect.poll(() => lanes.count()).toBe(2);
    expect(await page.getByRole('button', { name: '7 d' }).getAttribute('aria-pressed')).toBe('true');
    // A link that names its pens wins over the remembered view.
    await page.goto(`${page.url().split('/trends')[0]}/trends?tags=${mlss}`);
    await expect.poll(() => lanes.count()).toBe(1);
    expect(errors).toEqual([]);
    await ctx.close();
  });

  it('signals: 10 000 tags scroll with only visible rows rendered; filter, sort and live update', async () => {
    const ctx = await b.browser.newContext({ viewport: { width: 1280, height: 800 } });
    const page = await openAs(ctx, '/signals');
    const errors = watchConsole(page);
    await page.getByLabel('Plant').selectOption({ label: 'Bulk test plant' });
    const count = page.getByTestId('signals-count');
    await expect.poll(() => count.innerText(), { timeout: 20_000 }).toMatch(/^10,000 of 10,000 tags/);
    const rows = page.getByTestId('signals-row');
    const rendered = await rows.count();
    expect(rendered).toBeGreaterThan(10);
    expect(rendered).toBeLessThan(80);
    await shot(page, 'analyst-signals-top');

    const scroller = page.getByTestId('signals-scroller');
    await scroller.evaluate((el) => (el.scrollTop = el.scrollHeight / 2));
    await expect.poll(() => rows.filter({ hasText: 'BULK_05000' }).count()).toBe(1);
    expect(await rows.count()).toBeLessThan(80);
    await scroller.evaluate((el) => (el.scrollTop = el.scrollHeight));
    await expect.poll(() => rows.filter({ hasText: 'BULK_09999' }).count()).toBe(1);
    expect(await rows.count()).toBeLessThan(80);
    expect(await rows.filter({ hasText: 'BULK_00000' }).count()).toBe(0);
    await shot(page, 'analyst-signals-bottom');

    // filter by quality: exactly the bad ones, each marked BAD in words
    await page.getByLabel('Quality').selectOption('bad');
    await expect.poll(() => count.innerText()).toMatch(new RegExp(`^${bulkBad} of 10,000 tags`));
    expect(await rows.first().innerText()).toContain('BAD');
    await page.getByLabel('Quality').selectOption('all');
    // sorted by tag name ascending at first; one click on the header turns it round
    const tagHeader = page.getByRole('columnheader', { name: /^Tag/ });
    expect(await tagHeader.getAttribute('aria-sort')).toBe('ascending');
    await tagHeader.getByRole('button').click();
    expect(await tagHeader.getAttribute('aria-sort')).toBe('descending');
    await scroller.evaluate((el) => (el.scrollTop = 0));
    await expect.poll(() => rows.first().getAttribute('data-tag-id')).not.toBeNull();
    await expect.poll(() => rows.first().locator('td').first().innerText()).toBe('BULK_09999');

    // text filter, then a live value arriving through tag_latest (as ingest writes it) shows in place
    await page.getByLabel('Find in name or description').fill('BULK_00042');
    await expect.poll(() => count.innerText()).toMatch(/^1 of 10,000 tags/);
    await expect.poll(() => page.getByTestId('stream-state').innerText()).toBe('live');
    await q(`UPDATE tag_latest SET value = 777.25, quality = 0, ts = now(), received_at = now() WHERE tag_id = (SELECT id FROM tags WHERE plant_id = $1 AND name = 'BULK_00042')`, [bulk]);
    await expect.poll(() => rows.first().getByTestId('signal-value').textContent(), { timeout: 10_000 }).toBe('777.3');
    await shot(page, 'analyst-signals-live');
    expect(await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth)).toBeLessThanOrEqual(0);
    expect(errors).toEqual([]);
    await ctx.close();
  });
});
