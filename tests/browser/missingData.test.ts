// The demo's run on the invented cohort with gaps, in the browser: the statistician reads the complete cases beside the
// pooled multiple imputation, the pooled curves and the observed-against-imputed plots (seeds/imputationRun.ts).
import 'reflect-metadata';
import { describe, expect, it } from 'vitest';
import { dataSource, initDatabase } from '../../server/src/platform/database/dataSource';
import { GAPS_COHORT_NAME } from '../../server/src/demo/seeds/gapsCohort';
import { appUrl } from '../helpers/appServer';
import { inTab, screenshot, useAppAndBrowser } from '../helpers/browser';

let runId: string;
let imputations: number;

const browser = useAppAndBrowser(async () => {
  await initDatabase(false);
  const rows: { id: string; m: string }[] = await dataSource.query(
    `SELECT r.id, r.settings->'missingData'->>'imputations' AS m FROM validation_runs r
     JOIN cohort_versions cv ON cv.id = r.cohort_version_id JOIN cohorts c ON c.id = cv.cohort_id
     WHERE c.name = $1 AND r.status = 'completed' AND r.settings->'missingData'->>'method' = 'multiple-imputation'`,
    [GAPS_COHORT_NAME],
  );
  expect(rows.length, 'the demo seed has a completed run with multiple imputation').toBe(1);
  runId = rows[0].id;
  imputations = Number(rows[0].m);
});

describe('a run on a cohort with gaps', () => {
  it('shows the complete cases beside the pooled multiple imputation, with its curves and diagnostics', async () => {
    await inTab(
      browser(),
      'run-missing-data',
      async (page) => {
        await page.goto(`${appUrl}/runs/${runId}`);
        const section = page.locator('[data-test="missing-data"]');
        await section.waitFor();
        expect(await page.locator('[data-test="missing-data-left-out"]').textContent()).toMatch(
          /Complete cases: [\d,]+ patients.*Left out: [\d,]+ patients/,
        );
        expect(await page.locator('[data-test="missing-data-method"]').textContent()).toContain(String(imputations));
        for (const key of ['auc', 'oe', 'calibrationSlope'])
          expect(await page.locator(`[data-test="pooled-${key}"]`).textContent()).toMatch(/\d\.\d+/);
        await page.getByRole('img', { name: 'Pooled ROC curve' }).waitFor();
        await page.getByRole('img', { name: 'Pooled calibration curve' }).waitFor();
        await page
          .getByRole('img', { name: /^Observed and imputed values of / })
          .first()
          .waitFor();
        await screenshot(page, 'run-missing-data');
      },
      'statistician@demo.test',
    );
  });
});
