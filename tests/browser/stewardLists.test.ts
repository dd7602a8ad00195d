// The lists a statistician and an admin work from, in the browser: drift alerts of one score acknowledged together
// with one note, and the audit trail in names, filtered by day, downloaded as CSV.
import 'reflect-metadata';
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { dataSource, initDatabase } from '../../server/src/platform/database/dataSource';
import { appUrl } from '../helpers/appServer';
import { inTab, screenshot, useAppAndBrowser } from '../helpers/browser';
import { createScoreFixture } from '../helpers/fixtures';

const stamp = Date.now();
const scoreName = `Alerting score ${stamp}`;
const browser = useAppAndBrowser(async () => {
  await initDatabase(false);
  const score = await createScoreFixture({ name: scoreName });
  const [rule] = await dataSource.query(
    `INSERT INTO alert_rules (score_id, kind) VALUES ($1, 'oe-limit') RETURNING id`,
    [score.scoreId],
  );
  for (const period of ['2026-Q1', '2026-Q2', '2026-Q3']) {
    await dataSource.query(
      `INSERT INTO drift_alerts (score_version_id, rule_id, period, detail) VALUES ($1, $2, $3, '{"message":"O/E above its upper limit"}')`,
      [score.scoreVersionId, rule.id, period],
    );
  }
});

describe('alerts and the audit trail in the browser', () => {
  it('the statistician filters alerts by score and acknowledges them together with one note', () =>
    inTab(
      browser(),
      'alerts-bulk',
      async (page) => {
        await page.goto(`${appUrl}/alerts`);
        await page.locator('[data-test="alerts-score"]').locator('.v-field').click();
        await page.getByRole('option', { name: scoreName }).click();
        // Wait for the filtered list itself (the unfiltered one may show as many rows of other scores for a moment).
        await expect.poll(() => page.locator('tbody tr').filter({ hasNotText: scoreName }).count()).toBe(0);
        await expect.poll(() => page.locator('tbody tr').filter({ hasText: scoreName }).count()).toBe(3);
        expect(await page.locator('tbody').innerText()).not.toMatch(/Kestrel/);
        await page.locator('[data-test="ack-all"]').click();
        await page
          .locator('[data-test="ack-all-note"] textarea')
          .first()
          .fill('Discussed at the quarterly meeting; recalibration planned.');
        await page.locator('[data-test="ack-all-confirm"]').click();
        await expect
          .poll(() => page.getByText('“Discussed at the quarterly meeting; recalibration planned.”').count())
          .toBe(0); // open view: acknowledged ones leave it
        await page.getByRole('button', { name: 'Acknowledged' }).click();
        await expect
          .poll(() => page.getByText('“Discussed at the quarterly meeting; recalibration planned.”').count())
          .toBe(3);
        await screenshot(page, 'alerts-acknowledged-together');
      },
      'statistician@demo.test',
    ));

  it('the admin reads the trail in names, filters it by day and downloads it', () =>
    inTab(
      browser(),
      'audit-names',
      async (page) => {
        await page.goto(`${appUrl}/admin/audit`);
        await page.getByRole('textbox', { name: 'Action starts with' }).fill('drift_alert.acknowledged');
        // Other tests acknowledge alerts too: this test's three entries are the ones naming its score.
        const rows = page
          .locator('tbody tr')
          .filter({ hasText: 'drift_alert.acknowledged' })
          .filter({ hasText: scoreName });
        await expect.poll(() => rows.count()).toBeGreaterThanOrEqual(3);
        const first = await rows.first().innerText();
        expect(first).toContain('Dr. Tomas Ilunga');
        expect(first).toMatch(new RegExp(`alert on ${scoreName} v1, 2026-Q`));
        expect(first).not.toMatch(/[0-9a-f]{8}-[0-9a-f]{4}-/);
        await screenshot(page, 'audit-names');
        await page.locator('[data-test="audit-from"] input').fill('2999-01-01');
        await expect.poll(() => page.getByText('No entries match.').count()).toBe(1);
        await page.locator('[data-test="audit-from"] input').fill('');
        await expect.poll(() => rows.count()).toBeGreaterThanOrEqual(3);
        const [download] = await Promise.all([
          page.waitForEvent('download'),
          page.locator('[data-test="audit-csv"]').click(),
        ]);
        const text = readFileSync((await download.path())!, 'utf8');
        expect(text.split('\r\n')[0]).toMatch(/^seq,at,actor_email,action/);
        expect(text).toMatch(/drift_alert\.acknowledged/);
        expect(text).not.toMatch(/cohort\.upload\.received/);
      },
      'admin@demo.test',
    ));
});
