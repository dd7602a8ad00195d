// The committee flow in the browser: the statistician reviews a completed run, the chair signs it after
// re-entering the password, and the clinician then sees the score card with the clinical-use caution.
// The run is inserted as a completed record with invented figures (this checks the workflow, not the statistics).
import 'reflect-metadata';
import { createHash, randomUUID } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { dataSource, initDatabase } from '../../server/src/platform/database/dataSource';
import { appUrl } from '../helpers/appServer';
import { inTab, reviewRun, useAppAndBrowser } from '../helpers/browser';
import { createCohortFixture, createScoreFixture, kestrelRows } from '../helpers/fixtures';

const est = (estimate: number, lower: number, upper: number) => ({ estimate, lower, upper });

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

const browser = useAppAndBrowser(async () => {
  await initDatabase(false);
  scoreName = `Browser sign-off score ${randomUUID().slice(0, 6)}`;
  const score = await createScoreFixture({ name: scoreName });
  versionId = score.scoreVersionId;
  const cohort = await createCohortFixture(kestrelRows(40, 5), { label: 'Browser fixture quarter' });
  runId = await insertCompletedRun(score.scoreVersionId, cohort.cohortVersionId);
});

describe('review, sign-off and score card in the browser', () => {
  it('the statistician records a review on the run page', () =>
    inTab(
      browser(),
      'signoff-statistician',
      async (page) => {
        await reviewRun(
          page,
          runId,
          'fit for use',
          'AUC and calibration match the published figures; no subgroup concerns.',
        );
      },
      'statistician@demo.test',
    ));

  it('the chair finds it in the queue and signs after re-entering the password', () =>
    inTab(
      browser(),
      'signoff-chair',
      async (page) => {
        await page.goto(`${appUrl}/signoff-queue`);
        const row = page.getByRole('row').filter({ hasText: scoreName });
        await row.getByRole('link', { name: 'Open' }).click();
        await page.getByRole('button', { name: 'Approve for clinical use' }).click();
        const dialog = page.locator('[data-test="signature-dialog"]');
        await dialog.getByText('Meaning of this signature: approve for clinical use.').waitFor();
        expect(await dialog.getByRole('button', { name: 'Sign' }).isDisabled(), 'no password yet').toBe(true);
        await dialog.getByLabel('Re-enter your password to sign').fill(DEMO_PASSWORD);
        await dialog.getByRole('button', { name: 'Sign' }).click();
        const signed = page.locator('tr[data-meaning="approve for clinical use"]');
        await signed.waitFor();
        expect(await signed.innerText()).toMatch(/Dr\. Imogen Hartwell/);
        expect(await signed.innerText()).toMatch(/UTC/);
      },
      'chair@demo.test',
    ));

  it('the clinician sees the score card with the clinical-use caution on it', () =>
    inTab(
      browser(),
      'signoff-clinician',
      async (page) => {
        await page.goto(`${appUrl}/scorecards`);
        const card = page.locator(`.score-card[data-version="${versionId}"]`);
        await card.waitFor();
        await card.getByRole('note', { name: 'Clinical-use caution' }).waitFor();
        expect(await card.innerText()).toMatch(/AUC/);
        expect(await card.locator('[data-test="approval"]').innerText()).toMatch(/Approved by Dr\. Imogen Hartwell/);
      },
      'clinician@demo.test',
    ));
});
