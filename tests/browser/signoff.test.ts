// The committee flow in the browser: the statistician reviews a completed run, the chair signs it after
// re-entering the password, and the clinician then sees the score card with the clinical-use caution.
// The run is inserted as a completed record with invented figures (this checks the workflow, not the statistics).
import 'reflect-metadata';
import { createHash, randomUUID } from 'node:crypto';
import { mkdirSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import type { Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DEMO_PASSWORD } from '../../server/src/config';
import { dataSource, initDatabase } from '../../server/src/db/dataSource';
import { signIn, startAppAndBrowser, stopAppAndBrowser, type BrowserSession } from '../helpers/browser';
import { createCohortFixture, createScoreFixture, kestrelRows } from '../helpers/fixtures';

const artifacts = fileURLToPath(new URL('../artifacts', import.meta.url));
const est = (estimate: number, lower: number, upper: number) => ({ estimate, lower, upper });

let browser: BrowserSession;
let runId: string;
let scoreName: string;
let versionId: string;

async function insertCompletedRun(scoreVersionId: string, cohortVersionId: string): Promise<string> {
  const results = {
    overall: {
      engineVersion: 'browser-fixture',
      n: 420,
      events: 63,
      nonEvents: 357,
      eventRate: 0.15,
      auc: { ...est(0.72, 0.66, 0.78), se: 0.03 },
      calibrationIntercept: { converged: true, ...est(0.05, -0.2, 0.3), se: 0.12 },
      calibrationSlope: { converged: true, ...est(1.02, 0.8, 1.24), se: 0.11, intercept: 0.02 },
      oe: { ...est(1.04, 0.81, 1.33), observed: 63, expected: 60.6, method: 'fixture' },
      thresholds: [],
      warnings: [],
    },
    subgroups: [],
    periods: [],
    minSubgroupEvents: 10,
  };
  const sha = (s: string) => createHash('sha256').update(s).digest('hex');
  const rows: { id: string }[] = await dataSource.query(
    `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, results, engine_version, inputs_sha256, results_sha256, finished_at)
     VALUES ($1, $2, '{}'::jsonb, 'completed', 1, $3::jsonb, 'browser-fixture', $4, $5, now()) RETURNING id`,
    [scoreVersionId, cohortVersionId, JSON.stringify(results), sha(randomUUID()), sha(randomUUID())],
  );
  return rows[0].id;
}

async function pageFor(email: string): Promise<Page> {
  const page = await browser.context.newPage(); // a new tab has its own sessionStorage, so its own session
  await signIn(page, email, DEMO_PASSWORD);
  return page;
}

beforeAll(async () => {
  mkdirSync(artifacts, { recursive: true });
  await initDatabase(false);
  scoreName = `Browser sign-off score ${randomUUID().slice(0, 6)}`;
  const score = await createScoreFixture({ name: scoreName });
  versionId = score.scoreVersionId;
  const cohort = await createCohortFixture(kestrelRows(40, 5), { label: 'Browser fixture quarter' });
  runId = await insertCompletedRun(score.scoreVersionId, cohort.cohortVersionId);
  browser = await startAppAndBrowser();
});

afterAll(async () => {
  await stopAppAndBrowser(browser);
});

describe('review, sign-off and score card in the browser', () => {
  it('the statistician records a review on the run page', async () => {
    const page = await pageFor('statistician@demo.test');
    try {
      await page.goto(`${new URL(page.url()).origin}/runs/${runId}`);
      await page.getByRole('heading', { name: 'Review and sign-off' }).waitFor({ timeout: 20_000 });
      await page.getByRole('combobox', { name: 'Verdict' }).click({ force: true }); // Vuetify lays its field over the input
      await page.getByRole('option', { name: 'fit for use', exact: true }).click();
      await page.getByLabel('Reasoning').fill('AUC and calibration match the published figures; no subgroup concerns.');
      await page.getByRole('button', { name: 'Save review' }).click();
      await page.getByText('awaiting the chair’s decision').waitFor();
    } catch (err) {
      await page.screenshot({ path: `${artifacts}/signoff-statistician.png`, fullPage: true });
      throw err;
    } finally {
      await page.close();
    }
  });

  it('the chair finds it in the queue and signs after re-entering the password', async () => {
    const page = await pageFor('chair@demo.test');
    try {
      await page.goto(`${new URL(page.url()).origin}/signoff-queue`);
      const row = page.getByRole('row').filter({ hasText: scoreName });
      await row.getByRole('link', { name: 'Open' }).click();
      await page.getByRole('button', { name: 'Approve for clinical use' }).click();
      const dialog = page.locator('[data-test="signature-dialog"]');
      await expect(dialog.getByText('Meaning of this signature: approve for clinical use.')).toBeTruthy();
      await dialog.getByText('Meaning of this signature: approve for clinical use.').waitFor();
      await expect(await dialog.getByRole('button', { name: 'Sign' }).isDisabled()).toBe(true); // no password yet
      await dialog.getByLabel('Re-enter your password to sign').fill(DEMO_PASSWORD);
      await dialog.getByRole('button', { name: 'Sign' }).click();
      const signed = page.locator('tr[data-meaning="approve for clinical use"]');
      await signed.waitFor();
      expect(await signed.innerText()).toMatch(/Dr\. Imogen Hartwell/);
      expect(await signed.innerText()).toMatch(/UTC/);
    } catch (err) {
      await page.screenshot({ path: `${artifacts}/signoff-chair.png`, fullPage: true });
      throw err;
    } finally {
      await page.close();
    }
  });

  it('the clinician sees the score card with the clinical-use caution on it', async () => {
    const page = await pageFor('clinician@demo.test');
    try {
      await page.goto(`${new URL(page.url()).origin}/scorecards`);
      const card = page.locator(`.score-card[data-version="${versionId}"]`);
      await card.waitFor({ timeout: 15_000 });
      await card.getByRole('note', { name: 'Clinical-use caution' }).waitFor();
      expect(await card.innerText()).toMatch(/AUC/);
      expect(await card.locator('[data-test="approval"]').innerText()).toMatch(/Approved by Dr\. Imogen Hartwell/);
    } catch (err) {
      await page.screenshot({ path: `${artifacts}/signoff-clinician.png`, fullPage: true });
      throw err;
    } finally {
      await page.close();
    }
  });
});
