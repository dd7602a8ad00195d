// Model updating end to end in the browser, on the invented demo data: the statistician proposes a logistic
// recalibration of Kestrel v2 from its completed run on 2025-Q1, sees the draft version with its "validate on different
// data" banner, runs that draft on a later quarter (2025-Q3) from the start form, waits for it to complete and reviews
// it; the chair signs it after re-entering the password; the clinician's score card then names the new version.
// Along the way the run and cohort pages show "Is the cohort big enough?". This checks the workflow, not the statistics.
import 'reflect-metadata';
import type { Page } from 'playwright-core';
import { describe, expect, it } from 'vitest';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { dataSource, initDatabase } from '../../server/src/platform/database/dataSource';
import { DEMO_COHORT_NAME, KESTREL_SCORE_NAME } from '../../server/src/demo/seeds/cohorts';
import { appUrl } from '../helpers/appServer';
import { artifactsDir, inTab, pickFromList, screenshot, useAppAndBrowser } from '../helpers/browser';

const DERIVATION_QUARTER = '2025-Q1';
const LATER_QUARTER = '2025-Q3';

let scoreId: string;
let cohortId: string;
let laterCohortVersion: number;
let sourceRunId: string;
// Filled in as the steps go.
let newVersion: number;
let newVersionId: string;
let newRunId: string;

/** Vuetify lays its field over the input, hence force. */
async function choose(page: Page, label: string, option: RegExp): Promise<void> {
  await page.getByRole('combobox', { name: label }).click({ force: true });
  await page.getByRole('option', { name: option }).click();
}

const browser = useAppAndBrowser(async () => {
  await initDatabase(false);
  const scores: { id: string }[] = await dataSource.query('SELECT id FROM scores WHERE name = $1', [
    KESTREL_SCORE_NAME,
  ]);
  expect(scores.length, 'the demo seed has the Kestrel score').toBe(1);
  scoreId = scores[0].id;
  const quarters: { cohort_id: string; version: number; label: string }[] = await dataSource.query(
    `SELECT cv.cohort_id, cv.version, cv.label FROM cohort_versions cv JOIN cohorts c ON c.id = cv.cohort_id WHERE c.name = $1 AND cv.label = ANY($2)`,
    [DEMO_COHORT_NAME, [DERIVATION_QUARTER, LATER_QUARTER]],
  );
  expect(quarters.length, 'the demo seed has both quarters').toBe(2);
  cohortId = quarters[0].cohort_id;
  laterCohortVersion = quarters.find((q) => q.label === LATER_QUARTER)!.version;
  const runs: { id: string }[] = await dataSource.query(
    `SELECT r.id FROM validation_runs r JOIN score_versions sv ON sv.id = r.score_version_id JOIN cohort_versions cv ON cv.id = r.cohort_version_id
     WHERE sv.score_id = $1 AND sv.version = 2 AND cv.cohort_id = $2 AND cv.label = $3 AND r.status = 'completed' ORDER BY r.created_at LIMIT 1`,
    [scoreId, cohortId, DERIVATION_QUARTER],
  );
  expect(runs.length, `the demo seed has a completed Kestrel v2 run on ${DERIVATION_QUARTER}`).toBe(1);
  sourceRunId = runs[0].id;
});

describe('propose a recalibrated version, validate it on a later quarter, sign it', () => {
  it('the statistician proposes a logistic recalibration from the 2025-Q1 run', async () => {
    await inTab(
      browser(),
      'recalibration-propose',
      async (page) => {
        await page.goto(`${appUrl}/runs/${sourceRunId}`);
        await page.getByRole('heading', { name: new RegExp(`${KESTREL_SCORE_NAME} v2 on`) }).waitFor();
        // The run page answers "Is the cohort big enough?" from the run's own counts and AUC.
        const adequacy = page.locator('[data-test="adequacy-panel"]');
        await adequacy.waitFor();
        expect(await adequacy.locator('[data-test="adequacy-auc"]').innerText()).toMatch(/the AUC of this run/);
        expect(await adequacy.locator('[data-test="adequacy-verdict"]').innerText()).toMatch(
          /Preferred size met|Minimum met|Below the minimum/,
        );

        await page.getByRole('button', { name: 'Propose recalibrated version' }).click();
        const dialog = page.getByRole('dialog');
        await dialog.getByText('Logistic recalibration', { exact: true }).click();
        await dialog.getByRole('button', { name: 'Preview' }).click();
        await dialog.getByRole('table', { name: 'Calibration before and after' }).waitFor();
        expect(await dialog.innerText()).toMatch(/Chosen: logistic recalibration/);
        await dialog.getByRole('img', { name: 'Calibration before and after the proposed update' }).waitFor();
        await page.screenshot({ path: `${artifactsDir}/recalibration-preview.png` });

        await dialog.getByRole('button', { name: 'Create draft version' }).click();
        const created = dialog.getByTestId('recalibrated-version');
        await created.waitFor();
        const text = await created.innerText();
        expect(text).toMatch(
          /must be validated on different data \(a later period\) and signed off before clinical use/,
        );
        newVersion = Number(/Draft version (\d+) created/.exec(text)?.[1]);
        expect(newVersion).toBeGreaterThan(2);
        await page.screenshot({ path: `${artifactsDir}/recalibration-draft-created.png` });

        // The version history lists the draft, linked to the run it came from, not approved and not yet used.
        await created.getByRole('link', { name: 'Open the score’s version history' }).click();
        await page.waitForURL(`**/scores/${scoreId}`);
        const row = page
          .getByRole('row')
          .filter({ hasText: `v${newVersion}` })
          .first();
        await row.waitFor();
        const rowText = await row.innerText();
        expect(rowText).toMatch(/recalibrated from/);
        expect(rowText).toMatch(/not approved/);
        expect(rowText).toMatch(/not yet used/);
        await screenshot(page, 'recalibration-version-history');
      },
      'statistician@demo.test',
    );
    const rows: { id: string; derived_from_run_id: string }[] = await dataSource.query(
      'SELECT id, derived_from_run_id FROM score_versions WHERE score_id = $1 AND version = $2',
      [scoreId, newVersion],
    );
    expect(rows[0]?.derived_from_run_id).toBe(sourceRunId);
    newVersionId = rows[0].id;
  });

  it('the statistician runs the draft on the later quarter 2025-Q3, sees it complete and reviews it', async () => {
    await inTab(
      browser(),
      'recalibration-validate',
      async (page) => {
        await page.goto(`${appUrl}/runs/new`);
        await pickFromList(
          page,
          'Score version',
          KESTREL_SCORE_NAME,
          new RegExp(`^${KESTREL_SCORE_NAME} — version ${newVersion}$`),
        );
        await pickFromList(
          page,
          'Cohort version',
          DEMO_COHORT_NAME,
          new RegExp(`version ${laterCohortVersion} · ${LATER_QUARTER}`),
        );
        await page.getByRole('button', { name: 'Queue the run' }).click();
        await page.waitForURL(/\/runs\/[0-9a-f-]{36}$/);
        newRunId = page.url().split('/').pop()!;
        await page
          .getByRole('heading', { name: new RegExp(`${KESTREL_SCORE_NAME} v${newVersion} on .* · ${LATER_QUARTER}`) })
          .waitFor();
        // The page polls while the run waits and computes; the headline figures appear when it has completed.
        await page.getByText('AUC (c-statistic)', { exact: true }).first().waitFor({ timeout: 180_000 });
        await page.locator('[data-test="adequacy-panel"]').waitFor();
        await page.getByRole('img', { name: 'Calibration plot' }).waitFor();
        await screenshot(page, 'recalibration-validation-run');

        await page.getByRole('heading', { name: 'Review and sign-off' }).waitFor();
        await choose(page, 'Verdict', /^fit for use$/);
        await page
          .getByLabel('Reasoning')
          .fill(
            `Recalibrated v${newVersion} checked on ${LATER_QUARTER}, a later quarter than the one it was fitted on.`,
          );
        await page.getByRole('button', { name: 'Save review' }).click();
        await page.getByText('awaiting the chair’s decision').waitFor();
      },
      'statistician@demo.test',
    );
    const [run]: { status: string; score_version_id: string }[] = await dataSource.query(
      'SELECT status, score_version_id FROM validation_runs WHERE id = $1',
      [newRunId],
    );
    expect(run).toEqual({ status: 'completed', score_version_id: newVersionId });
  });

  it('the cohort page of 2025-Q3 answers "is it big enough?" with the AUC of a run on that quarter', async () => {
    await inTab(
      browser(),
      'recalibration-cohort',
      async (page) => {
        await page.goto(`${appUrl}/cohorts/${cohortId}?version=${laterCohortVersion}`);
        const panel = page.locator('[data-test="adequacy-panel"]');
        await panel.waitFor();
        expect(await panel.locator('[data-test="adequacy-auc"]').innerText()).toMatch(
          /latest completed run on this cohort version/,
        );
        expect(await panel.getByRole('table', { name: 'Expected precision from this cohort' }).innerText()).toMatch(
          /Calibration slope/,
        );
        await panel.scrollIntoViewIfNeeded();
        await page.screenshot({ path: `${artifactsDir}/recalibration-cohort-adequacy.png` });
        // The link carries the cohort's event rate and AUC into the planner, which computes at once.
        await panel.getByRole('link', { name: 'Plan the size of a cohort' }).click();
        await page.waitForURL(/\/sample-size\?/);
        await page.getByTestId('sample-size-largest').waitFor();
      },
      'statistician@demo.test',
    );
  });

  it('the chair signs the validation run of the new version after re-entering the password', async () => {
    await inTab(
      browser(),
      'recalibration-sign',
      async (page) => {
        await page.goto(`${appUrl}/signoff-queue`);
        const row = page
          .getByRole('row')
          .filter({ hasText: `v${newVersion}` })
          .filter({ hasText: LATER_QUARTER });
        await row.getByRole('link', { name: 'Open' }).click();
        await page.waitForURL(`**/runs/${newRunId}`);
        await page.getByRole('button', { name: 'Approve for clinical use' }).click();
        const dialog = page.locator('[data-test="signature-dialog"]');
        await dialog.getByText('Meaning of this signature: approve for clinical use.').waitFor();
        await dialog.getByLabel('Re-enter your password to sign').fill(DEMO_PASSWORD);
        await dialog.getByRole('button', { name: 'Sign' }).click();
        const signed = page.locator('tr[data-meaning="approve for clinical use"]');
        await signed.waitFor();
        expect(await signed.innerText()).toMatch(/Dr\. Imogen Hartwell/);
        await screenshot(page, 'recalibration-signed');
      },
      'chair@demo.test',
    );
    const [v]: { clinical_status: string; approved_run_id: string }[] = await dataSource.query(
      'SELECT clinical_status, approved_run_id FROM score_versions WHERE id = $1',
      [newVersionId],
    );
    expect(v).toEqual({ clinical_status: 'approved', approved_run_id: newRunId });
  });

  it('the clinician’s score card names the new version', async () => {
    await inTab(
      browser(),
      'recalibration-scorecard',
      async (page) => {
        await page.goto(`${appUrl}/scorecards`);
        const card = page.locator(`.score-card[data-version="${newVersionId}"]`);
        await card.waitFor();
        expect(await card.innerText()).toMatch(new RegExp(`Version ${newVersion} · approved for clinical use`));
        await card.getByRole('note', { name: 'Clinical-use caution' }).waitFor();
        expect(await card.locator('[data-test="approval"]').innerText()).toMatch(/Approved by Dr\. Imogen Hartwell/);
        await card.scrollIntoViewIfNeeded();
        await page.screenshot({ path: `${artifactsDir}/recalibration-scorecard.png` });
      },
      'clinician@demo.test',
    );
  });
});
