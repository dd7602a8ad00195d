// The demo score's drift in the browser: the statistician opens the drift timeline of Kestrel v2 (the version the
// demo runs use), sees each period's charts drawn and the alert raised by the seeded baseline-risk drift.
// The demo scenario (invented; seeded by tests/helpers/globalSetup.ts) raises baseline risk by about +0.08 logit
// per quarter, so calibration-in-the-large and the deterioration CUSUM must move away from the go-live value.
import 'reflect-metadata';
import { describe, expect, it } from 'vitest';
import { dataSource, initDatabase } from '../../server/src/platform/database/dataSource';
import { KESTREL_SCORE_NAME } from '../../server/src/demo/seeds/cohorts';
import { appUrl } from '../helpers/appServer';
import { inTab, screenshot, useAppAndBrowser } from '../helpers/browser';

let scoreId: string;
const browser = useAppAndBrowser(async () => {
  await initDatabase(false);
  const rows: { id: string }[] = await dataSource.query(`SELECT id FROM scores WHERE name = $1`, [KESTREL_SCORE_NAME]);
  expect(rows.length, 'the demo seed has the Kestrel score').toBe(1);
  scoreId = rows[0].id;
});

describe('drift timeline in the browser', () => {
  it('shows the per-period charts of the demo score and the alert the drift raised', () =>
    inTab(
      browser(),
      'drift-timeline',
      async (page) => {
        await page.goto(`${appUrl}/scores/${scoreId}/versions/2/drift`);
        await page.getByRole('heading', { name: `Drift over time: ${KESTREL_SCORE_NAME} v2` }).waitFor();
        await page.getByRole('note', { name: 'Clinical-use caution' }).first().waitFor();

        // Eight demo quarters and the demo's cohort with coding gaps (2026-Q1, run with multiple imputation; its figures
        // here are its complete cases) → nine rows in the per-period table (the seed's own design).
        const periodRows = page.getByRole('table', { name: 'Patients and events per period' }).locator('tbody tr');
        await expect.poll(() => periodRows.count(), { timeout: 30_000 }).toBe(9);
        // Each point says which run it comes from (one run per cohort version, demo quarters in period order).
        await expect.poll(() => periodRows.first().getByTestId('drift-period-run').innerText()).toMatch(/^run #\d+/);
        expect(await periodRows.first().getByTestId('drift-period-span').innerText()).toBe('2024-Q1');
        expect(await periodRows.nth(7).getByTestId('drift-period-span').innerText()).toBe('2025-Q4');
        expect(await periodRows.last().getByTestId('drift-period-span').innerText()).toBe('2026-Q1');

        // Every chart panel draws a canvas: CITL, O/E, AUC, slope, O − E limits, cumulative O − E, CUSUM.
        for (const name of [
          'Calibration-in-the-large by period',
          'O/E ratio by period',
          'AUC (c-statistic) by period',
          'Calibration slope by period',
        ]) {
          const canvas = page.getByRole('img', { name });
          await canvas.waitFor();
          const box = await canvas.boundingBox();
          expect(box && box.width > 100 && box.height > 100, `${name} is drawn`).toBe(true);
        }
        await page
          .getByRole('img', { name: 'Observed minus expected events per period with control limits' })
          .waitFor();
        await page.getByRole('img', { name: 'Cumulative observed minus expected events' }).waitFor();
        await page.getByRole('img', { name: 'Risk-adjusted CUSUM chart' }).waitFor();
        await expect.poll(() => page.locator('canvas').count()).toBeGreaterThanOrEqual(7);

        // The drift raised at least one alert, listed with its rule.
        const alertRows = page.getByTestId('alert-list').locator('tbody tr');
        await alertRows.first().waitFor();
        await expect.poll(() => alertRows.first().innerText()).not.toMatch(/No alerts/);

        // The table view of a chart carries the numbers (nine periods again).
        const citlPanel = page.locator('.chart-panel').filter({ hasText: 'Calibration-in-the-large' }).first();
        await citlPanel.getByRole('button', { name: 'Show the numbers as a table' }).click();
        await expect.poll(() => citlPanel.locator('tbody tr').count(), { timeout: 30_000 }).toBe(9);
        // The seeded drift (+0.08 logit a quarter, seeds/kestrelData.ts) puts the last demo quarter's CITL above the first's.
        const citlOf = async (row: number) =>
          Number(await citlPanel.locator('tbody tr').nth(row).locator('td').nth(1).innerText());
        expect(await citlOf(7)).toBeGreaterThan(await citlOf(0));
        await citlPanel.getByRole('button', { name: 'Show the chart' }).click();

        await screenshot(page, 'drift-timeline');
      },
      'statistician@demo.test',
    ));
});
