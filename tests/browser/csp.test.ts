// The content-security policy, checked where it matters: in Chromium, against the built client. Each page a user
// reaches (sign-in, a run page, the score cards, a drift timeline, the API reference, the upload page) must load and draw without one
// `securitypolicyviolation` event and without a CSP message on the console, and the policy itself must keep scripts
// to the app's own files (no 'unsafe-inline', no 'unsafe-eval', no inline event-handler attributes).
// A control case injects an inline script into a loaded page: it must be blocked and reported, which shows the
// listener below really sees violations (otherwise "no violations" would prove nothing).
import 'reflect-metadata';
import type { Page, Response } from 'playwright-core';
import { beforeAll, describe, expect, it } from 'vitest';
import { dataSource, initDatabase } from '../../server/src/platform/database/dataSource';
import { KESTREL_SCORE_NAME } from '../../server/src/demo/seeds/cohorts';
import { appUrl } from '../helpers/appServer';
import { inTab, screenshot, signIn, useAppAndBrowser } from '../helpers/browser';

let scoreId: string;
let runId: string;

interface Violation {
  directive: string;
  blocked: string;
  sample: string;
  source: string;
  line: number;
}

declare global {
  interface Window {
    __cspViolations?: Violation[];
    __inlineRan?: boolean;
  }
}

// Runs in every document before the page's own scripts (Playwright adds it through the DevTools protocol, which the
// page's CSP does not govern), so violations during start-up are caught too.
const RECORD_VIOLATIONS = () => {
  window.__cspViolations = [];
  document.addEventListener('securitypolicyviolation', (e) => {
    window.__cspViolations!.push({
      directive: e.violatedDirective,
      blocked: e.blockedURI,
      sample: e.sample,
      source: e.sourceFile,
      line: e.lineNumber,
    });
  });
};

const browser = useAppAndBrowser(async () => {
  await initDatabase(false);
  const scores: { id: string }[] = await dataSource.query(`SELECT id FROM scores WHERE name = $1`, [
    KESTREL_SCORE_NAME,
  ]);
  expect(scores.length, 'the demo seed has the Kestrel score').toBe(1);
  scoreId = scores[0].id;
  const runs: { id: string }[] = await dataSource.query(
    `SELECT r.id FROM validation_runs r JOIN score_versions sv ON sv.id = r.score_version_id
     WHERE sv.score_id = $1 AND r.status = 'completed' ORDER BY r.finished_at DESC LIMIT 1`,
    [scoreId],
  );
  expect(runs.length, 'the demo seed has a completed run').toBe(1);
  runId = runs[0].id;
});

// Registered after the shared set-up, so it runs once the browser has started.
beforeAll(async () => {
  await browser().context.addInitScript(RECORD_VIOLATIONS);
});

/** Directive name → its source list, from a CSP header value. */
function parsePolicy(header: string): Map<string, string[]> {
  const out = new Map<string, string[]>();
  for (const part of header.split(';')) {
    const [name, ...sources] = part.trim().split(/\s+/);
    if (name) out.set(name.toLowerCase(), sources);
  }
  return out;
}

/** CSP complaints Chromium prints on the console ("Refused to … because it violates the following Content Security Policy directive"). */
function watchConsole(page: Page): string[] {
  const messages: string[] = [];
  page.on('console', (msg) => {
    const text = msg.text();
    if (/content security policy|refused to (load|execute|apply|evaluate|connect|frame)/i.test(text))
      messages.push(text);
  });
  return messages;
}

async function violationsOn(page: Page): Promise<Violation[]> {
  // Reports are queued as tasks: after one more animation frame and one task, those already raised have arrived.
  await page.evaluate(() => new Promise((resolve) => requestAnimationFrame(() => setTimeout(resolve, 0))));
  return page.evaluate(() => window.__cspViolations ?? []);
}

const pages = () => [
  {
    name: 'a run page',
    path: `/runs/${runId}`,
    ready: (p: Page) =>
      p.getByRole('heading', { level: 1, name: new RegExp(`^${KESTREL_SCORE_NAME} v\\d+ on`) }).waitFor(),
  },
  {
    name: 'the score cards',
    path: '/scorecards',
    ready: (p: Page) => p.getByRole('heading', { level: 1, name: 'Score cards' }).waitFor(),
  },
  {
    name: 'a drift timeline',
    path: `/scores/${scoreId}/versions/2/drift`,
    ready: async (p: Page) => {
      await p.getByRole('heading', { name: `Drift over time: ${KESTREL_SCORE_NAME} v2` }).waitFor();
      await p.getByRole('img', { name: 'Risk-adjusted CUSUM chart' }).waitFor();
    },
  },
  {
    name: 'the API reference',
    path: '/api-reference',
    ready: async (p: Page) => {
      await p.getByRole('heading', { level: 1, name: 'API reference' }).waitFor();
      await p.getByRole('heading', { level: 2, name: '/api/runs' }).waitFor();
    },
  },
  {
    name: 'the upload page',
    path: '/cohorts/upload',
    ready: (p: Page) => p.getByRole('heading', { level: 1, name: 'Upload a cohort' }).waitFor(),
  },
];

describe('content-security policy in Chromium', () => {
  it('sends a policy that allows only the app’s own scripts', () =>
    inTab(browser(), 'csp-policy', async (page) => {
      const response = (await page.goto(`${appUrl}/sign-in`)) as Response;
      const header = response.headers()['content-security-policy'];
      expect(typeof header, 'the HTML page carries a CSP header').toBe('string');
      const policy = parsePolicy(header);
      const scriptSrc = policy.get('script-src') ?? policy.get('default-src');
      expect(policy.has('script-src'), 'script-src is set explicitly').toBe(true);
      expect(scriptSrc).toEqual(["'self'"]);
      for (const bad of ["'unsafe-inline'", "'unsafe-eval'", "'unsafe-hashes'", '*', 'data:', 'http:', 'https:'])
        expect(scriptSrc).not.toContain(bad);
      expect(policy.get('script-src-attr')).toEqual(["'none'"]);
      expect(policy.get('object-src')).toEqual(["'none'"]);
      expect(policy.get('frame-ancestors')).toEqual(["'none'"]);
      expect(policy.get('default-src')).toEqual(["'self'"]);
      // API answers carry the policy too (a JSON answer opened as a page cannot run anything either).
      const api = await page.request.get(`${appUrl}/api/health`);
      expect(parsePolicy(api.headers()['content-security-policy'] ?? '').get('script-src')).toEqual(["'self'"]);
    }));

  it('blocks and reports an injected inline script (the listener sees real violations)', () =>
    inTab(browser(), 'csp-control', async (page) => {
      const consoleCsp = watchConsole(page);
      await page.goto(`${appUrl}/sign-in`);
      await page.getByRole('heading', { name: 'Plumbline' }).waitFor();
      await page.evaluate(() => {
        const s = document.createElement('script');
        s.textContent = 'window.__inlineRan = true;';
        document.head.append(s);
      });
      await page.waitForFunction(() =>
        (window.__cspViolations ?? []).some((v) => v.directive.startsWith('script-src')),
      );
      expect(await page.evaluate(() => window.__inlineRan === true)).toBe(false);
      await expect.poll(() => consoleCsp.length).toBeGreaterThan(0);
    }));

  it('loads sign-in and the signed-in pages without a single violation', () =>
    inTab(browser(), 'csp-pages', async (page) => {
      const consoleCsp = watchConsole(page);
      const found: { page: string; violations: Violation[] }[] = [];
      await page.goto(`${appUrl}/sign-in`);
      await page.getByRole('heading', { name: 'Plumbline' }).waitFor();
      await page.waitForLoadState('networkidle');
      found.push({ page: 'sign-in', violations: await violationsOn(page) });

      // statistician reaches every page below (run pages, score cards, drift, uploads).
      await signIn(page, 'statistician@demo.test');
      found.push({ page: 'after sign-in', violations: await violationsOn(page) });
      for (const target of pages()) {
        await page.goto(`${appUrl}${target.path}`);
        await target.ready(page);
        await page.waitForLoadState('networkidle');
        found.push({ page: target.name, violations: await violationsOn(page) });
      }
      await screenshot(page, 'csp-last-page');
      expect(
        found.filter((f) => f.violations.length > 0),
        'CSP violations by page',
      ).toEqual([]);
      expect(consoleCsp, 'CSP messages on the console').toEqual([]);
      expect(found.map((f) => f.page)).toEqual([
        'sign-in',
        'after sign-in',
        'a run page',
        'the score cards',
        'a drift timeline',
        'the API reference',
        'the upload page',
      ]);
    }));
});
