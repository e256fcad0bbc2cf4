import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, shot, watchConsole } from '../helpers/browser.ts';
import { startTestServer } from '../helpers/server.ts';

describe('sign-in in Debian Chromium', () => {
  let env: Awaited<ReturnType<typeof startTestServer>>;
  let b: { browser: Browser; close(): Promise<void> };
  beforeAll(async () => {
    env = await startTestServer({ FLOCSTREAM_ADMIN_EMAIL: 'chief@kestrel.invalid', FLOCSTREAM_ADMIN_PASSWORD: 'e2e-admin-password-1' });
    b = await launchBrowser();
  });
  afterAll(async () => {
    await b?.close();
    await env?.close();
  });

  it('an admin signs in, sees the navigation for the role, and signs out', async () => {
    const page = await b.browser.newPage({ viewport: { width: 1280, height: 800 } });
    const errors = watchConsole(page);
    await page.goto(`${env.server.url}/access`);
    await page.waitForURL(/\/login$/);
    await page.getByLabel('E-mail').fill('chief@kestrel.invalid');
    await page.getByLabel('Password').fill('wrong-password-xx');
    await page.getByRole('button', { name: 'Sign in' }).click();
    await page.getByRole('alert').waitFor();
    expect(await page.getByRole('alert').innerText()).toMatch(/wrong e-mail or password/);
    await shot(page, 'sign-in-wrong-password');
    await page.getByLabel('Password').fill('e2e-admin-password-1');
    await page.getByRole('button', { name: 'Sign in' }).click();
    await page.waitForURL(/\/access$/);
    await page.getByRole('heading', { name: 'Users' }).waitFor();
    expect(await page.getByTestId('whoami').innerText()).toContain('chief@kestrel.invalid · admin');
    const nav = await page.getByRole('navigation', { name: 'Main' }).innerText();
    expect(nav).toContain('Access');
    await shot(page, 'access-admin');
    await page.getByRole('button', { name: 'Sign out' }).click();
    await page.waitForURL(/\/login$/);
    // 401 on /auth/me while signed out is expected and handled; anything else is an error.
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
  });
});
