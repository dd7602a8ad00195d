// Debian's Chromium driven by playwright-core: never a downloaded browser.
import { mkdirSync } from 'node:fs';
import { mkdtemp, rm } from 'node:fs/promises';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { afterAll, beforeAll } from 'vitest';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { closeDatabase } from '../../server/src/platform/database/dataSource';
import { appUrl, startAppServer, stopAppServer } from './appServer';

/** Screenshots of the browser tests (ignored by git). */
export const artifactsDir = fileURLToPath(new URL('../artifacts', import.meta.url));

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
  // Generous on a busy machine: every wait is for something a person would wait for, so a long limit costs nothing when all is well.
  context.setDefaultTimeout(60_000);
  context.setDefaultNavigationTimeout(60_000);
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

/**
 * The set-up every browser test file shares: its own fixtures first (`prepare`), then the app server and Chromium,
 * all stopped after the file. Returns a getter for the browser session.
 */
export function useAppAndBrowser(prepare?: () => Promise<void>): () => BrowserSession {
  let session: BrowserSession | undefined;
  beforeAll(async () => {
    mkdirSync(artifactsDir, { recursive: true });
    await prepare?.();
    session = await startAppAndBrowser();
  });
  afterAll(async () => {
    await stopAppAndBrowser(session);
  });
  return () => {
    if (!session) throw new Error('the app server and browser did not start');
    return session;
  };
}

/** A full-page screenshot in tests/artifacts, taken from the top (the app bar is fixed: a scrolled shot draws it mid-page). */
export async function screenshot(page: Page, name: string): Promise<void> {
  await page.evaluate(() => window.scrollTo(0, 0));
  await page.screenshot({ path: path.join(artifactsDir, `${name}.png`), fullPage: true });
}

/**
 * Runs `body` in a new tab (a tab has its own sessionStorage, so its own session), signed in first when `signInAs`
 * is given. A failure leaves `<name>-failure.png` in tests/artifacts; the tab is always closed.
 */
export async function inTab(
  session: BrowserSession,
  name: string,
  body: (page: Page) => Promise<void>,
  signInAs?: string,
): Promise<void> {
  const page = await session.context.newPage();
  try {
    if (signInAs) await signIn(page, signInAs);
    await body(page);
  } catch (err) {
    await page
      .screenshot({ path: path.join(artifactsDir, `${name}-failure.png`), fullPage: true })
      .catch(() => undefined);
    throw err;
  } finally {
    await page.close();
  }
}

/** Fills the sign-in form and submits it; does not wait for the outcome. */
export async function submitSignIn(page: Page, email: string, password: string, baseUrl = appUrl): Promise<void> {
  await page.goto(`${baseUrl}/sign-in`);
  await page.getByLabel('E-mail').fill(email);
  await page.getByLabel('Password', { exact: true }).fill(password);
  await page.getByRole('button', { name: 'Sign in' }).click();
}

/**
 * On a completed run's page, as a statistician: chooses the verdict, writes the reasoning, saves the review and waits
 * until the page says the run awaits the chair.
 */
export async function reviewRun(page: Page, runId: string, verdict: string, reasoning: string): Promise<void> {
  await page.goto(`${appUrl}/runs/${runId}`);
  await page.getByRole('heading', { name: 'Review and sign-off' }).waitFor();
  await page.getByRole('combobox', { name: 'Verdict' }).click({ force: true }); // Vuetify lays its field over the input
  await page.getByRole('option', { name: verdict, exact: true }).click();
  await page.getByLabel('Reasoning').fill(reasoning);
  await page.getByRole('button', { name: 'Save review' }).click();
  await page.getByText('awaiting the chair’s decision').waitFor();
}

/** Signs in through the form and waits until the app has left the sign-in page. */
export async function signIn(page: Page, email: string, password = DEMO_PASSWORD, baseUrl = appUrl): Promise<void> {
  await submitSignIn(page, email, password, baseUrl);
  await page.waitForURL((url) => !url.pathname.startsWith('/sign-in'));
}

/**
 * Picks an entry of a searchable list (a Vuetify autocomplete) as a person does with a long list: opens it, types part
 * of the name to narrow it, and clicks the entry. Vuetify lays its field over the input, hence force.
 */
export async function pickFromList(page: Page, label: string, typed: string, option: RegExp): Promise<void> {
  await page.getByRole('combobox', { name: label }).click({ force: true });
  await page.keyboard.type(typed);
  await page.getByRole('option', { name: option }).click();
}
