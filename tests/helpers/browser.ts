import fs from 'node:fs';
import path from 'node:path';
import { chromium, type Browser, type Page } from 'playwright-core';
import { chromiumPath } from '../../scripts/system-deps.ts';
import { afterAll, beforeAll } from 'vitest';
import { startTestServer } from './server.ts';

export const SCREENSHOT_DIR = path.resolve('tests/e2e/screenshots');

/**
 * Debian's Chromium, headless, with the flags this closed network needs. Playwright gives every
 * launch a fresh temporary profile (its own --user-data-dir), removed on close.
 */
export async function launchBrowser(): Promise<{ browser: Browser; close(): Promise<void> }> {
  const browser = await chromium.launch({
    executablePath: chromiumPath(),
    headless: true,
    args: [
      '--no-sandbox',
      '--disable-gpu',
      '--disable-quic',
      '--no-first-run',
      '--disable-background-networking',
      '--disable-component-update',
      '--disable-sync',
    ],
  });
  return {
    browser,
    async close() {
      await browser.close();
    },
  };
}

/** Collects console errors and page errors; a test asserts the list is empty. */
export function watchConsole(page: Page): string[] {
  const errors: string[] = [];
  page.on('console', (m) => {
    if (m.type() === 'error') errors.push(m.text());
  });
  page.on('pageerror', (e) => errors.push(e.message));
  return errors;
}

export async function shot(page: Page, name: string): Promise<string> {
  fs.mkdirSync(SCREENSHOT_DIR, { recursive: true });
  const file = path.join(SCREENSHOT_DIR, `${name}.png`);
  await page.screenshot({ path: file, fullPage: true });
  return file;
}

/** Signs in through the login page the app redirects to from `url`, then waits for `landing`. */
export async function signIn(page: Page, url: string, who: { email: string; password: string }, landing: RegExp | ((u: URL) => boolean)): Promise<void> {
  await page.goto(url);
  await page.waitForURL(/\/login$/);
  await page.getByLabel('E-mail').fill(who.email);
  await page.getByLabel('Password').fill(who.password);
  await page.getByRole('button', { name: 'Sign in' }).click();
  await page.waitForURL(landing);
}

/** The administrator every browser suite starts its server with. */
export const E2E_ADMIN = { email: 'chief@kestrel.invalid', password: 'e2e-admin-password-1' };

/**
 * Registers the usual suite hooks: the real server with {@link E2E_ADMIN} and Debian Chromium
 * before all tests, both closed after. Read `env` and `browser` inside tests (set by then).
 */
export function serverAndBrowser(): { readonly env: Awaited<ReturnType<typeof startTestServer>>; readonly browser: Browser } {
  let env: Awaited<ReturnType<typeof startTestServer>> | undefined;
  let b: { browser: Browser; close(): Promise<void> } | undefined;
  beforeAll(async () => {
    env = await startTestServer({ FLOCSTREAM_ADMIN_EMAIL: E2E_ADMIN.email, FLOCSTREAM_ADMIN_PASSWORD: E2E_ADMIN.password });
    b = await launchBrowser();
  });
  afterAll(async () => {
    await b?.close();
    await env?.close();
  });
  return {
    get env() {
      if (!env) throw new Error('server not started (use inside a test)');
      return env;
    },
    get browser() {
      if (!b) throw new Error('browser not launched (use inside a test)');
      return b.browser;
    },
  };
}
