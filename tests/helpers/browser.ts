// Debian's Chromium driven by playwright-core: never a downloaded browser.
import { mkdtemp, rm } from 'node:fs/promises';
import os from 'node:os';
import path from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { DEMO_PASSWORD } from '../../server/src/config';
import { closeDatabase } from '../../server/src/db/dataSource';
import { appUrl, startAppServer, stopAppServer } from './appServer';

export const CHROMIUM_PATH = process.env.PLUMBLINE_CHROMIUM ?? '/usr/bin/chromium';

const CHROMIUM_ARGS = [
  '--no-sandbox',
  '--disable-gpu',
  '--disable-quic',
  '--no-first-run',
  '--disable-background-networking',
  '--disable-component-update',
  '--disable-sync',
];

export interface BrowserSession {
  context: BrowserContext;
  close: () => Promise<void>;
}

/** A headless Chromium with a throwaway profile folder, removed on close. */
export async function launchBrowser(): Promise<BrowserSession> {
  const profile = await mkdtemp(path.join(os.tmpdir(), 'plumbline-chromium-'));
  const context = await chromium.launchPersistentContext(profile, {
    executablePath: CHROMIUM_PATH,
    headless: true,
    args: CHROMIUM_ARGS,
    viewport: { width: 1366, height: 820 },
    locale: 'en-GB',
  });
  return {
    context,
    close: async () => {
      await context.close();
      await rm(profile, { recursive: true, force: true });
    },
  };
}

/** The app server and a browser, as every browser test starts them once its own fixtures are in place. */
export async function startAppAndBrowser(): Promise<BrowserSession> {
  await startAppServer();
  return launchBrowser();
}

/** Closes what startAppAndBrowser opened, and the test file's own database connection. */
export async function stopAppAndBrowser(browser: BrowserSession | undefined): Promise<void> {
  await browser?.close();
  await stopAppServer();
  await closeDatabase();
}

/** Fills the sign-in form and submits it; does not wait for the outcome. */
export async function submitSignIn(page: Page, email: string, password: string, baseUrl = appUrl): Promise<void> {
  await page.goto(`${baseUrl}/sign-in`);
  await page.getByLabel('E-mail').fill(email);
  await page.getByLabel('Password', { exact: true }).fill(password);
  await page.getByRole('button', { name: 'Sign in' }).click();
}

/** Signs in through the form and waits until the app has left the sign-in page. */
export async function signIn(page: Page, email: string, password = DEMO_PASSWORD, baseUrl = appUrl): Promise<void> {
  await submitSignIn(page, email, password, baseUrl);
  await page.waitForURL((url) => !url.pathname.startsWith('/sign-in'), { timeout: 15_000 });
}
