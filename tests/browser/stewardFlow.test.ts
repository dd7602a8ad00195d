// The steward's way through a new version of an existing cohort: from the cohort's page, an upload bound to it, left
// and resumed, subgroups chosen in the mapping, rejected rows ticked one by one, then stored as the next version; the
// run form then follows the cohort (its periods, its subgroups); the run is computed, reviewed by the statistician,
// found by its status and signed by the chair, and the clinician reads the score card.
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { initDatabase } from '../../server/src/platform/database/dataSource';
import { appUrl } from '../helpers/appServer';
import { inTab, pickFromList, reviewRun, screenshot, useAppAndBrowser } from '../helpers/browser';
import { until } from '../helpers/until';
import { createCohortFixture, createScoreFixture, kestrelRows } from '../helpers/fixtures';

const fixture = fileURLToPath(new URL('../fixtures/kestrel-2026q1.csv', import.meta.url));
// Invented, with blank Charlson indexes (104) and prior admissions (70), 164 rows with either (makeDemoCsv.ts).
const gapsFixture = fileURLToPath(new URL('../fixtures/kestrel-gaps-2026q2.csv', import.meta.url));
const stamp = Date.now();
const scoreName = `Steward flow score ${stamp}`;
const cohortName = `Steward flow cohort ${stamp}`;
let cohortId = '';
let scoreVersionId = '';
let runId = '';
const browser = useAppAndBrowser(async () => {
  await initDatabase(true);
  scoreVersionId = (await createScoreFixture({ name: scoreName })).scoreVersionId;
  cohortId = (await createCohortFixture(kestrelRows(80, 4), { name: cohortName, label: '2025-Q4' })).cohortId;
});

describe('steward → statistician → chair → clinician on a new version of an existing cohort', () => {
  it('is uploaded from the cohort page, resumed after leaving, mapped with subgroups, and stored with ticked exclusions', () =>
    inTab(
      browser(),
      'steward-new-version',
      async (page) => {
        await page.goto(`${appUrl}/cohorts/${cohortId}`);
        await page.locator('[data-test="upload-new-version"]').click();
        await page.locator('[data-test="bound-cohort"]').waitFor();
        expect(await page.locator('[data-test="bound-cohort"]').innerText()).toContain(cohortName);
        await page.locator('[data-test="file-input"] input[type="file"]').setInputFiles(fixture);
        await page.locator('[data-test="score-select"]').click();
        await page.getByRole('option', { name: new RegExp(scoreName) }).click();
        await page.locator('[data-test="download-template"]').waitFor();
        await page.locator('[data-test="cohort-label"] input').fill('2026-Q1');
        await page.locator('[data-test="send"]').click();
        await page.getByText('Screened: no direct identifiers').waitFor();

        // Leave the page, come back: the unfinished upload is listed and resumes at the mapping.
        await page.goto(`${appUrl}/cohorts`);
        await page.goto(`${appUrl}/cohorts/upload`);
        const listed = page.locator('[data-test="unfinished-uploads"]');
        await listed.waitFor();
        await screenshot(page, 'steward-unfinished-uploads');
        await listed.getByRole('button', { name: 'Resume' }).first().click();
        await page.getByText('Screened: no direct identifiers').waitFor();

        // Subgroups are chosen here: the suggested four, less "site".
        const picker = page.locator('[data-test="subgroup-columns"]');
        const chips = () => picker.locator('.v-chip').allInnerTexts();
        await expect
          .poll(async () => (await chips()).map((t) => t.trim()).sort())
          .toEqual(['age_band', 'sex', 'site', 'unit']);
        await picker.locator('.v-chip', { hasText: 'site' }).locator('button').click();
        await expect.poll(async () => (await chips()).map((t) => t.trim()).sort()).toEqual(['age_band', 'sex', 'unit']);
        await screenshot(page, 'steward-mapping-subgroups');
        await page.locator('[data-test="check-rows"]').click();
        await expect
          .poll(() => page.locator('[data-test="check-summary"]').innerText(), { timeout: 120_000 })
          .toMatch(/495 rows pass the checks; 5 rows were rejected/);

        // One ticked row is not enough: the server says which rows are left.
        await expect.poll(() => page.locator('[data-test="rejections"] tbody tr').count()).toBe(5);
        await page.locator('[data-test="rejections"] tbody tr').first().locator('input[type="checkbox"]').check();
        await page.locator('[data-test="store-chosen"]').click();
        await expect
          .poll(() => page.locator('[data-test="upload-error"]').innerText())
          .toMatch(/are neither excluded nor fixed/);
        // All five ticked (the header box ticks the page): stored as version 2 of the same cohort.
        await page.locator('[data-test="rejections"] thead input[type="checkbox"]').check();
        await expect
          .poll(() => page.locator('[data-test="store-chosen"]').innerText())
          .toMatch(/Exclude the 5 ticked row/);
        await screenshot(page, 'steward-rejections-ticked');
        await page.locator('[data-test="store-chosen"]').click();
        await page.locator('[data-test="version-detail"]').waitFor({ timeout: 60_000 });
        expect(page.url()).toContain(`/cohorts/${cohortId}`);
        await expect.poll(() => page.locator('[data-test="version-detail"]').innerText()).toMatch(/Version 2/);
        expect(await page.locator('[data-test="row-count"]').innerText()).toBe('495');
        await screenshot(page, 'steward-version-2');

        // The run form follows the cohort: monthly periods, its subgroup columns (site was not chosen).
        await page.goto(`${appUrl}/runs/new`);
        await pickFromList(page, 'Cohort version', cohortName, new RegExp(`${cohortName} — version 2`));
        await expect.poll(() => page.locator('.v-select', { hasText: 'Time grouping' }).innerText()).toMatch(/month/);
        const subgroups = page.locator('.v-select', { hasText: 'Subgroups' });
        await expect.poll(() => subgroups.innerText()).toMatch(/age_band[\s\S]*sex[\s\S]*unit/);
        expect(await subgroups.innerText()).not.toMatch(/\bsite\b/);
        // A site column comes from the same list: the units stand in for sites here.
        await page.locator('.v-select', { hasText: 'Site column' }).locator('.v-field').click();
        await page.getByRole('option', { name: 'unit', exact: true }).click();
        await expect.poll(() => page.locator('.v-select', { hasText: 'Site column' }).innerText()).toMatch(/unit/);
        await pickFromList(page, 'Score version', scoreName, new RegExp(scoreName));
        // Bootstrap replicates and their seed: intervals for Brier, ICI and net benefit, and the calibration band.
        await page.getByLabel('Bootstrap replicates').fill('50');
        await page.getByLabel('Bootstrap seed').fill('4242');
        await screenshot(page, 'steward-run-defaults');
        await page.getByRole('button', { name: 'Queue the run' }).click();
        await page.waitForURL(/\/runs\/[0-9a-f-]{36}$/);
        runId = page.url().split('/').pop()!;
        // The run computes in the server's run thread; its page says what it is doing, then shows the figures.
        await page.getByText('AUC (c-statistic)').first().waitFor({ timeout: 180_000 });
        await expect.poll(() => page.locator('body').innerText()).toMatch(/age_band/);
        // Performance by subgroup and by site: forest plots drawn, Cochran's Q and the pooling said in words.
        const bySex = page.locator('[data-test="subgroup-forest-sex"]');
        await bySex.waitFor();
        expect(await bySex.locator('canvas').count()).toBe(4);
        expect(await bySex.locator('[data-test="heterogeneity"]').innerText()).toMatch(/Cochran's Q[\s\S]*on 1 df, p/);
        const bySite = page.locator('[data-test="site-forest"]');
        expect(await bySite.locator('canvas').count()).toBe(5); // the four forest plots and the curves by site
        expect(await bySite.locator('[data-test="site-pooling"]').innerText()).toMatch(/τ² = [\s\S]*I² = /);
        expect(await bySite.locator('[data-test="site-cautions"]').innerText()).toMatch(/fewer than 100 events/);
        await bySite.scrollIntoViewIfNeeded();
        await screenshot(page, 'steward-run-sites');

        // The bootstrap's 95% CIs beside the figures, the band under the calibration curve said in a line.
        await expect.poll(() => page.locator('body').innerText()).toMatch(/Brier score\s+[\d.]+ \(95% CI [\d.]+ to /);
        await expect.poll(() => page.locator('body').innerText()).toMatch(/E90 [\d.]+ \(95% CI /);
        expect(await page.locator('[data-test="calibration-band-note"]').innerText()).toMatch(
          /pointwise 95% bootstrap percentile band[\s\S]*50 replicates, seed 4242/,
        );
        // The decision curve on the standardised scale.
        const marks = page.locator('[data-test="decision-curve-marks"]');
        expect(await marks.innerText()).toMatch(/^Net benefit of the score \(bootstrap 95% CI\): at 5% /);
        await page.locator('[data-test="decision-curve-scale"]').getByRole('button', { name: 'Standardised' }).click();
        await expect.poll(() => marks.innerText()).toMatch(/^Standardised net benefit of the score/);
        // Calibration curves by subgroup: choose the column, switch a group off.
        const curves = page.locator('[data-test="subgroup-forest"] [data-test="subgroup-calibration"]');
        await curves.locator('canvas').waitFor();
        await curves.locator('.v-select').locator('.v-field').click();
        await page.getByRole('option', { name: 'sex', exact: true }).click();
        await expect.poll(() => curves.locator('.v-card-title').innerText()).toBe('Calibration by sex');
        const toggles = curves.locator('[data-test^="curve-toggle-"]');
        await expect.poll(() => toggles.count()).toBe(2);
        const male = curves.locator('[data-test="curve-toggle-M"]');
        expect(await male.getAttribute('aria-pressed')).toBe('true');
        await male.click();
        await expect.poll(() => male.getAttribute('aria-pressed')).toBe('false');
        expect(await curves.locator('[data-test="subgroup-calibration-method"]').innerText()).toMatch(
          /loess of the outcome on predicted risk[\s\S]*span 0.75/,
        );
        await curves.scrollIntoViewIfNeeded();
        await screenshot(page, 'steward-run-curves-by-group');
        await screenshot(page, 'steward-run-completed');
      },
      'steward@demo.test',
    ));

  it('the statistician reviews the run', () =>
    inTab(
      browser(),
      'steward-flow-statistician',
      async (page) => {
        await reviewRun(
          page,
          runId,
          'fit for use',
          'Discrimination and calibration hold on the new quarter; subgroups by unit show no concern.',
        );
        await screenshot(page, 'steward-flow-review');
      },
      'statistician@demo.test',
    ));

  it('the chair finds the run in the runs list by its status and signs it', () =>
    inTab(
      browser(),
      'steward-flow-chair',
      async (page) => {
        await page.goto(`${appUrl}/runs`);
        await page.locator('[data-test="runs-search"] input').fill(cohortName);
        await page.locator('[data-test="runs-stage"]').locator('.v-field').click();
        await page.getByRole('option', { name: 'awaiting sign-off' }).click();
        const row = page.getByRole('row').filter({ hasText: cohortName });
        await expect.poll(() => row.count()).toBe(1);
        expect(await row.innerText()).toMatch(/fit for use[\s\S]*awaiting sign-off/);
        await screenshot(page, 'steward-flow-runs-list');
        await row.click();
        await page.getByRole('button', { name: 'Approve for clinical use' }).click();
        const dialog = page.locator('[data-test="signature-dialog"]');
        await dialog.getByLabel('Re-enter your password to sign').fill(DEMO_PASSWORD);
        await dialog.getByRole('button', { name: 'Sign' }).click();
        await page.locator('tr[data-meaning="approve for clinical use"]').waitFor();
        await screenshot(page, 'steward-flow-signed');
      },
      'chair@demo.test',
    ));

  it('the clinician reads the score card', () =>
    inTab(
      browser(),
      'steward-flow-clinician',
      async (page) => {
        await page.goto(`${appUrl}/scorecards`);
        const card = page.locator(`.score-card[data-version="${scoreVersionId}"]`);
        await card.waitFor();
        await card.getByRole('note', { name: 'Clinical-use caution' }).waitFor();
        expect(await card.innerText()).toMatch(/AUC/);
        await screenshot(page, 'steward-flow-card');
      },
      'clinician@demo.test',
    ));
});

describe('a steward uploads a cohort whose predictors have gaps', () => {
  it('says which predictors may have gaps, keeps those rows, and the version page shows where the gaps are', () =>
    inTab(
      browser(),
      'steward-gaps',
      async (page) => {
        const name = `Coding gaps cohort ${stamp}`;
        await page.goto(`${appUrl}/cohorts/upload`);
        await page.locator('[data-test="file-input"] input[type="file"]').setInputFiles(gapsFixture);
        await page.locator('[data-test="score-select"]').click();
        await page.getByRole('option', { name: new RegExp(scoreName) }).click();
        await page.locator('[data-test="cohort-name"] input').fill(name);
        await page.locator('[data-test="cohort-label"] input').fill('2026-Q2');
        await page.locator('[data-test="send"]').click();
        await page.getByText('Screened: no direct identifiers').waitFor();
        await page.locator('[data-test="gaps-help"]').waitFor();
        await page.locator('[data-test="gaps-charlson_index"] input').check();
        await page.locator('[data-test="gaps-prior_admissions"] input').check();
        await screenshot(page, 'steward-gaps-mapping');
        await page.locator('[data-test="check-rows"]').click();
        await expect
          .poll(() => page.locator('[data-test="check-summary"]').innerText(), { timeout: 120_000 })
          .toMatch(/600 rows pass the checks; 0 rows were rejected/);
        expect(await page.locator('[data-test="check-gaps"]').innerText()).toMatch(
          /164 of the rows that pass have gaps in prior_admissions, charlson_index/,
        );
        await page.locator('[data-test="store"]').click();
        const section = page.locator('[data-test="missingness"]');
        await section.waitFor({ timeout: 60_000 });
        expect(await page.locator('[data-test="row-count"]').innerText()).toBe('600');
        await expect
          .poll(() => section.locator('[data-test="missingness-summary"]').innerText())
          .toMatch(/164 of 600 patients \(27\.3%\) miss at least one predictor/);
        const together = section.locator('[data-test="pattern-prior_admissions + charlson_index"]');
        expect((await together.locator('td').allInnerTexts()).slice(0, 3)).toEqual(['missing', 'missing', '10 (1.7%)']);
        // The charts are drawn: per column, by subgroup (chosen from the list) and by period.
        await expect.poll(() => section.locator('canvas').count()).toBe(3);
        // Chosen again until the chart shows it: on a busy machine a click can land while the list is still opening.
        const bySubgroup = section.locator('[data-test="missingness-by-subgroup"]');
        await until(
          'the missing-values chart by site',
          async () => {
            const text = await bySubgroup.innerText();
            if (!/Missing predictors by site/.test(text)) {
              await section.locator('[data-test="missingness-subgroup"] .v-field').click({ timeout: 5_000 });
              await page.getByRole('option', { name: 'site', exact: true }).click({ timeout: 5_000 });
            }
            return text;
          },
          (text) => /Missing predictors by site/.test(text),
          60_000,
          1_000,
        );
        await section
          .locator('[data-test="missingness-by-subgroup"]')
          .getByRole('button', { name: /as a table/ })
          .click();
        await expect
          .poll(() => section.locator('[data-test="missingness-by-subgroup"] tbody').innerText(), { timeout: 30_000 })
          .toMatch(/North annex/);
        await section.scrollIntoViewIfNeeded();
        await screenshot(page, 'steward-gaps-version');
      },
      'steward@demo.test',
    ));
});
