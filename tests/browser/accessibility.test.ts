// Accessibility of every page each role can reach, checked by axe-core (pinned in package.json) in Debian's Chromium:
// no critical or serious violation on the menu pages of each role, nor on the run page, the drift page, the report,
// a cohort and a score. Also: the rows of the runs, cohorts and scores lists open with the keyboard (Enter on a row), and
// the run page fits a 390 px wide phone screen.
import 'reflect-metadata';
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import type { Page } from 'playwright-core';
import { describe, expect, it } from 'vitest';
import { pageRoles } from '../../shared/src/access';
import type { Role } from '../../shared/src/roles';
import { navigationFor } from '../../client/src/navigation';
import { dataSource, initDatabase } from '../../server/src/platform/database/dataSource';
import { DEMO_COHORT_NAME, KESTREL_SCORE_NAME } from '../../server/src/demo/seeds/cohorts';
import { GAPS_COHORT_NAME } from '../../server/src/demo/seeds/gapsCohort';
import { appUrl } from '../helpers/appServer';
import { inTab, screenshot, useAppAndBrowser } from '../helpers/browser';

const axeSource = readFileSync(createRequire(import.meta.url).resolve('axe-core/axe.min.js'), 'utf8');

interface Ids {
  runId: string;
  otherRunId: string;
  scoreId: string;
  cohortId: string;
  /** The demo cohort with gaps: its page shows the missing-value charts and combinations. */
  gapsCohortId: string;
  /** The demo run with multiple imputation (its Missing data section) and the demo's score comparison. */
  imputedRunId: string;
  comparisonId: string;
}
let ids: Ids;

const browser = useAppAndBrowser(async () => {
  await initDatabase(false);
  const runs: { id: string; score_id: string }[] = await dataSource.query(
    `SELECT r.id, s.id AS score_id FROM validation_runs r
     JOIN score_versions sv ON sv.id = r.score_version_id JOIN scores s ON s.id = sv.score_id
     WHERE s.name = $1 AND r.status = 'completed' ORDER BY r.created_at LIMIT 2`,
    [KESTREL_SCORE_NAME],
  );
  const cohorts: { id: string }[] = await dataSource.query(`SELECT id FROM cohorts WHERE name = $1`, [
    DEMO_COHORT_NAME,
  ]);
  expect(runs.length, 'the demo seed has completed runs').toBe(2);
  expect(cohorts.length, 'the demo seed has its cohort').toBe(1);
  const [gaps]: { id: string }[] = await dataSource.query(`SELECT id FROM cohorts WHERE name = $1`, [GAPS_COHORT_NAME]);
  expect(gaps, 'the demo seed has its cohort with gaps').toBeDefined();
  const [imputed]: { id: string }[] = await dataSource.query(
    `SELECT id FROM validation_runs WHERE status = 'completed' AND settings->'missingData'->>'method' = 'multiple-imputation' LIMIT 1`,
  );
  const [comparison]: { id: string }[] = await dataSource.query('SELECT id FROM score_comparisons LIMIT 1');
  expect(imputed, 'the demo seed has a run with multiple imputation').toBeDefined();
  expect(comparison, 'the demo seed has a score comparison').toBeDefined();
  ids = {
    runId: runs[0].id,
    otherRunId: runs[1].id,
    scoreId: runs[0].score_id,
    cohortId: cohorts[0].id,
    gapsCohortId: gaps.id,
    imputedRunId: imputed.id,
    comparisonId: comparison.id,
  };
});

/** Pages reached from a record rather than the menu, with the roles that open them (shared/src/access.ts). */
const detailPages = (i: Ids): { path: string; roles: readonly Role[] }[] => [
  { path: `/runs/${i.runId}`, roles: pageRoles('run') },
  { path: `/runs/${i.runId}/report`, roles: pageRoles('run-report') },
  { path: `/runs/compare?a=${i.runId}&b=${i.otherRunId}`, roles: pageRoles('run-compare') },
  { path: '/runs/new', roles: pageRoles('run-start') },
  { path: `/scores/${i.scoreId}`, roles: pageRoles('score-detail') },
  { path: `/scores/${i.scoreId}/versions/2/drift`, roles: pageRoles('score-drift') },
  { path: `/scores/${i.scoreId}/versions/new`, roles: pageRoles('score-version-new') },
  { path: `/cohorts/${i.cohortId}`, roles: pageRoles('cohort') },
  { path: `/cohorts/${i.gapsCohortId}`, roles: pageRoles('cohort') },
  { path: `/runs/${i.imputedRunId}`, roles: pageRoles('run') },
  { path: `/comparisons/${i.comparisonId}`, roles: pageRoles('comparison') },
  { path: '/api-reference', roles: ['admin'] }, // public: one role's visit is enough
];

interface Finding {
  page: string;
  rule: string;
  impact: string;
  targets: string[];
}

/** Opens a page as a person would (its heading shown, its requests answered) and runs axe on the whole document. */
async function scan(page: Page, path: string): Promise<Finding[]> {
  await page.goto(`${appUrl}${path}`);
  await page.getByRole('heading', { level: 1 }).first().waitFor();
  await page.waitForLoadState('networkidle');
  // Loading bars gone (pages and tables), as a person waits for the page to settle before reading it.
  await expect
    .poll(() => page.locator('.v-progress-linear--active, .v-data-table-progress').count(), { timeout: 60_000 })
    .toBe(0);
  await page.evaluate(axeSource);
  const violations = await page.evaluate(async () => {
    const axe = (
      window as unknown as {
        axe: {
          run: (
            ctx: Document,
            opts: object,
          ) => Promise<{ violations: { id: string; impact: string; nodes: { target: string[] }[] }[] }>;
        };
      }
    ).axe;
    const result = await axe.run(document, { resultTypes: ['violations'] });
    return result.violations.map((v) => ({
      id: v.id,
      impact: v.impact,
      targets: v.nodes.slice(0, 5).map((n) => n.target.join(' ')),
    }));
  });
  return violations
    .filter((v) => v.impact === 'critical' || v.impact === 'serious')
    .map((v) => ({ page: path, rule: v.id, impact: v.impact, targets: v.targets }));
}

const ROLES: Role[] = ['steward', 'statistician', 'chair', 'clinician', 'admin'];

describe('accessibility of every page, for every role (axe-core)', () => {
  for (const role of ROLES) {
    // Up to 13 pages a role, each scanned whole: on a busy 2-core machine a role takes 1–3 minutes, hence the long limit.
    it(
      `${role}: no critical or serious violation on any page the role can reach`,
      () =>
        inTab(
          browser(),
          `axe-${role}`,
          async (page) => {
            const paths = [
              ...navigationFor(role).map((n) => n.to),
              ...detailPages(ids)
                .filter((d) => d.roles.includes(role))
                .map((d) => d.path),
            ];
            const findings: Finding[] = [];
            for (const path of paths) findings.push(...(await scan(page, path)));
            expect(paths.length).toBeGreaterThanOrEqual(3);
            expect(findings, JSON.stringify(findings, null, 2)).toEqual([]);
          },
          `${role}@demo.test`,
        ),
      600_000,
    );
  }
});

describe('lists work from the keyboard', () => {
  for (const list of [
    { path: '/runs', opens: /\/runs\/[0-9a-f-]{36}$/ },
    { path: '/cohorts', opens: /\/cohorts\/[0-9a-f-]{36}$/ },
    { path: '/scores', opens: /\/scores\/[0-9a-f-]{36}$/ },
  ]) {
    it(`Enter on a focused row of ${list.path} opens it`, () =>
      inTab(
        browser(),
        `keyboard-${list.path.slice(1)}`,
        async (page) => {
          await page.goto(`${appUrl}${list.path}`);
          const row = page.locator('tbody tr[tabindex="0"]').first();
          await row.waitFor();
          // The row is in the tab order (tabindex 0, checked by the locator); give it the focus and press Enter.
          await row.focus();
          await expect.poll(() => page.evaluate(() => document.activeElement?.tagName)).toBe('TR');
          await page.keyboard.press('Enter');
          await page.waitForURL((url) => list.opens.test(url.pathname));
        },
        'statistician@demo.test',
      ));
  }
});

describe('a phone-sized screen', () => {
  it('the run page fits 390 px without sideways scrolling (wide tables scroll inside their own box)', () =>
    inTab(
      browser(),
      'run-page-390',
      async (page) => {
        await page.setViewportSize({ width: 390, height: 844 });
        await page.goto(`${appUrl}/runs/${ids.runId}`);
        await page.getByRole('heading', { name: 'Review and sign-off' }).waitFor();
        await page.getByRole('img', { name: 'ROC curve' }).waitFor();
        // The demo run has subgroup columns: their forest plots and tables must fit too.
        await page.locator('[data-test="subgroup-forest"]').waitFor();
        await page.waitForLoadState('networkidle');
        const widths = await page.evaluate(() => ({
          scroll: document.documentElement.scrollWidth,
          client: document.documentElement.clientWidth,
        }));
        expect(widths.client).toBeLessThanOrEqual(390);
        expect(widths.scroll, 'the page scrolls sideways').toBeLessThanOrEqual(widths.client);
        await screenshot(page, 'run-page-390');
      },
      'statistician@demo.test',
    ));
});
