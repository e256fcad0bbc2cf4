import fs from 'node:fs';
import path from 'node:path';
import { chromium, type Browser, type Page } from 'playwright-core';
import { chromiumPath } from '../../scripts/system-deps.ts';

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
