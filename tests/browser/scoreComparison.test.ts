// Two scores head to head in the browser, on the invented demo data: the statistician compares Kestrel v1 with the
// competing Wren index on one demo quarter from the comparisons page, is taken to its page at once, waits while the
// server's job computes it (a progress bar), reads the summary and both charts and finds it completed in the list; the chair
// opens the report of the run whose review relied on the demo's comparison and finds its section.
import 'reflect-metadata';
import { describe, expect, it } from 'vitest';
import { dataSource, initDatabase } from '../../server/src/platform/database/dataSource';
import { WREN_SCORE } from '../../server/src/demo/seeds/competingScore';
import { appUrl } from '../helpers/appServer';
import { inTab, pickFromList, screenshot, useAppAndBrowser } from '../helpers/browser';

const QUARTER = '2025-Q2';
let reviewedRunId: string;

const browser = useAppAndBrowser(async () => {
  await initDatabase(false);
  const rows: { run_id: string }[] = await dataSource.query(
    `SELECT rv.run_id FROM run_reviews rv JOIN score_comparisons sc ON sc.id = rv.comparison_id
     JOIN score_versions sv ON sv.id = sc.second_score_version_id JOIN scores s ON s.id = sv.score_id
     WHERE s.name = $1 AND rv.superseded_by IS NULL LIMIT 1`,
    [WREN_SCORE.name],
  );
  expect(rows.length, 'the demo seed has a review relying on the Kestrel–Wren comparison').toBe(1);
  reviewedRunId = rows[0].run_id;
});

describe('two scores on the same patients', () => {
  it('the statistician compares Kestrel v1 with the Wren index on one quarter', async () => {
    await inTab(
      browser(),
      'score-comparison-start',
      async (page) => {
        await page.goto(`${appUrl}/comparisons`);
        // The lists hold every score and cohort version of the registry: type to narrow them, as a person would.
        await pickFromList(page, 'First score version', 'Kestrel', /^Kestrel 30-day Readmission Score — version 1$/);
        await pickFromList(page, 'Second score version', 'Wren', /^Wren Early Readmission Index — version 1$/);
        await pickFromList(
          page,
          'Cohort version (the same patients)',
          QUARTER,
          new RegExp(`^Fernhollow medical discharges .* · ${QUARTER} `),
        );
        await page.getByLabel('Bootstrap replicates').fill('50');
        await page.getByRole('button', { name: 'Compare', exact: true }).click();
        await page.waitForURL(/\/comparisons\/[0-9a-f-]{36}$/);
        const id = page.url().split('/').pop()!;
        // The request only queued it: the server's job computes it while the page shows a progress bar (if it is
        // still at work when the page first reads it), then the results.
        await page.getByRole('progressbar', { name: 'Computing the comparison…' }).waitFor({ state: 'detached' });
        const sentences = page.getByTestId('comparison-sentences');
        await sentences.filter({ hasText: /has the higher AUC, by/ }).waitFor();
        const text = await sentences.textContent();
        expect(text).toMatch(/has the higher AUC, by \d\.\d{3} \(95% CI/);
        expect(text).toMatch(/At a threshold of 10%, .* \(95% CI/);
        await page.getByRole('img', { name: 'Net benefit difference chart' }).waitFor();
        await page.getByRole('img', { name: 'Calibration plot of both scores' }).waitFor();
        await screenshot(page, 'score-comparison');
        // The list shows it completed.
        await page.getByRole('link', { name: 'All score comparisons' }).click();
        const row = page.locator('tr', { has: page.locator(`a[href$="/comparisons/${id}"]`) });
        await row.getByText('completed', { exact: true }).waitFor();
      },
      'statistician@demo.test',
    );
  });

  it("the chair finds the comparison the review relied on in the run's report", async () => {
    await inTab(
      browser(),
      'score-comparison-report',
      async (page) => {
        await page.goto(`${appUrl}/runs/${reviewedRunId}/report`);
        const section = page.locator('[data-report-part="comparison"]');
        await section.getByRole('heading', { name: 'Comparison with another score' }).waitFor();
        const sentences = section.getByTestId('comparison-sentences');
        await sentences.filter({ hasText: /has the higher AUC|have the same AUC/ }).waitFor();
        expect(await sentences.textContent()).toContain('Kestrel 30-day Readmission Score v2');
        expect(await sentences.textContent()).toContain('Wren Early Readmission Index v1');
      },
      'chair@demo.test',
    );
  });
});
