// A steward uploads the invented 2026-Q1 demo file, maps its columns, sees the rejected rows, excludes them,
// and sees the stored cohort version with its SHA-256.
import { createHash } from 'node:crypto';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { initDatabase } from '../../server/src/platform/database/dataSource';
import { appUrl } from '../helpers/appServer';
import { inTab, screenshot, useAppAndBrowser } from '../helpers/browser';
import { createScoreFixture } from '../helpers/fixtures';

const fixture = fileURLToPath(new URL('../fixtures/kestrel-2026q1.csv', import.meta.url));
const scoreName = `Browser upload score ${Date.now()}`;
const browser = useAppAndBrowser(async () => {
  await initDatabase(true);
  await createScoreFixture({ name: scoreName });
});

describe('cohort upload in the browser', () => {
  it('uploads, maps, shows rejected rows, excludes them and shows the stored version', () =>
    inTab(
      browser(),
      'cohort-upload',
      async (page) => {
        await page.goto(`${appUrl}/cohorts/upload`);
        await page.locator('[data-test="file-input"] input[type="file"]').setInputFiles(fixture);
        await page.locator('[data-test="score-select"]').click();
        await page.getByRole('option', { name: new RegExp(scoreName) }).click();
        const cohortName = `Fernhollow 2026 browser ${Date.now()}`;
        await page.locator('[data-test="cohort-name"] input').fill(cohortName);
        await page.locator('[data-test="cohort-label"] input').fill('2026-Q1');
        await page.locator('[data-test="send"]').click();
        await page.getByText('Screened: no direct identifiers').waitFor();
        await screenshot(page, 'cohort-upload-mapping');
        await page.locator('[data-test="check-rows"]').click();
        await page.locator('[data-test="check-summary"]').waitFor({ timeout: 120_000 });
        await expect
          .poll(() => page.locator('[data-test="check-summary"]').innerText())
          .toMatch(/495 rows pass the checks; 5 rows were rejected/);
        await expect.poll(() => page.locator('[data-test="rejections"] tbody tr').count()).toBe(5);
        expect(await page.locator('[data-test="rejections"]').innerText()).toMatch(/maybe/);
        await screenshot(page, 'cohort-upload-rejections');
        await page.locator('[data-test="store"]').click();
        await page.locator('[data-test="version-detail"]').waitFor({ timeout: 60_000 });
        expect(await page.locator('[data-test="row-count"]').innerText()).toBe('495');
        expect((await page.locator('[data-test="excluded-count"]').innerText()).startsWith('5')).toBe(true);
        expect(await page.locator('[data-test="sha256"]').innerText()).toBe(
          createHash('sha256').update(readFileSync(fixture)).digest('hex'),
        );
        await screenshot(page, 'cohort-stored');
      },
      'steward@demo.test',
    ));

  it('a Y/N column against the level "yes" stops the upload until its labels are mapped', () =>
    inTab(
      browser(),
      'cohort-upload-coding',
      async (page) => {
        // The demo file with emergency_admission (column 4) coded Y/N instead of the formula's yes/no.
        const lines = readFileSync(fixture, 'utf8').trimEnd().split('\n');
        const recoded = [
          lines[0],
          ...lines.slice(1).map((l) =>
            l
              .split(',')
              .map((c, i) => (i === 3 ? (c === 'yes' ? 'Y' : c === 'no' ? 'N' : c) : c))
              .join(','),
          ),
        ];
        const file = path.join(mkdtempSync(path.join(tmpdir(), 'plumbline-yn-')), 'kestrel-yn.csv');
        writeFileSync(file, `${recoded.join('\n')}\n`);
        await page.goto(`${appUrl}/cohorts/upload`);
        await page.locator('[data-test="file-input"] input[type="file"]').setInputFiles(file);
        await page.locator('[data-test="score-select"]').click();
        await page.getByRole('option', { name: new RegExp(scoreName) }).click();
        await page.locator('[data-test="cohort-name"] input').fill(`Fernhollow Y/N browser ${Date.now()}`);
        await page.locator('[data-test="send"]').click();
        await page.getByText('Screened: no direct identifiers').waitFor();
        // The mapping step states the level the formula expects.
        await expect
          .poll(() => page.locator('[data-test="predictor-emergency_admission"]').innerText())
          .toMatch(/indicator · level "yes"/);
        await page.locator('[data-test="check-rows"]').click();
        const issue = page.locator('[data-test="coding-issue-emergency_admission"]');
        await issue.waitFor({ timeout: 120_000 });
        expect(await issue.innerText()).toMatch(/"yes" never occurs/);
        expect(await page.locator('[data-test="store"]').count()).toBe(0);
        await screenshot(page, 'cohort-upload-coding-mismatch');
        // Read "Y" as the level; "N" stays "none of them".
        await issue.locator('.v-select').filter({ hasText: '“Y”' }).click();
        await page.getByRole('option', { name: 'means "yes" (the formula\'s level)' }).click();
        await page.locator('[data-test="apply-labels"]').click();
        await page.locator('[data-test="store"]').waitFor({ timeout: 120_000 });
        expect(await page.locator('[data-test="coding-issues"]').count()).toBe(0);
        await page.locator('[data-test="store"]').click();
        await page.locator('[data-test="version-detail"]').waitFor({ timeout: 60_000 });
        expect(await page.locator('[data-test="row-count"]').innerText()).toBe('495');
      },
      'steward@demo.test',
    ));
});
