import { describe, expect, it } from 'vitest';
import { E2E_ADMIN, serverAndBrowser, shot, watchConsole } from '../helpers/browser.ts';

describe('sign-in in Debian Chromium', () => {
  const suite = serverAndBrowser();

  it('an admin signs in, sees the navigation for the role, and signs out', async () => {
    const page = await suite.browser.newPage({ viewport: { width: 1280, height: 800 } });
    const errors = watchConsole(page);
    await page.goto(`${suite.env.server.url}/access`);
    await page.waitForURL(/\/login$/);
    await page.getByLabel('E-mail').fill(E2E_ADMIN.email);
    await page.getByLabel('Password').fill('wrong-password-xx');
    await page.getByRole('button', { name: 'Sign in' }).click();
    await page.getByRole('alert').waitFor();
    expect(await page.getByRole('alert').innerText()).toMatch(/wrong e-mail or password/);
    await shot(page, 'sign-in-wrong-password');
    await page.getByLabel('Password').fill(E2E_ADMIN.password);
    await page.getByRole('button', { name: 'Sign in' }).click();
    await page.waitForURL(/\/access$/);
    await page.getByRole('heading', { name: 'Users' }).waitFor();
    expect(await page.getByTestId('whoami').innerText()).toContain(`${E2E_ADMIN.email} · admin`);
    const nav = await page.getByRole('navigation', { name: 'Main' }).innerText();
    expect(nav).toContain('Access');
    await shot(page, 'access-admin');
    await page.getByRole('button', { name: 'Sign out' }).click();
    await page.waitForURL(/\/login$/);
    // 401 on /auth/me while signed out is expected and handled; anything else is an error.
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);
  });
});
