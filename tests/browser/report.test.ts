// The validation report of a demo run as a committee files it: printed to PDF by Chromium, read back with Debian's
// poppler-utils (pdftoppm for page pictures, pdftotext for the words). Checks that nothing is wider than the page,
// that no menu is printed, that every section is there once, and that the reporting checklist claims only what the
// rendered report shows. The page pictures are saved in tests/artifacts for a person to look at.
import 'reflect-metadata';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { dataSource, initDatabase } from '../../server/src/platform/database/dataSource';
import { KESTREL_SCORE_NAME } from '../../server/src/demo/seeds/cohorts';
import { appUrl } from '../helpers/appServer';
import { artifactsDir, inTab, useAppAndBrowser } from '../helpers/browser';

let runId: string;
let signerName: string;
let cohortLabel: string;
const browser = useAppAndBrowser(async () => {
  await initDatabase(false);
  // The demo's signed run (tests/helpers/globalSetup.ts seeds it): reviewed, approved by the chair, with subgroups and periods.
  const rows: { id: string; printed_name: string; label: string }[] = await dataSource.query(
    `SELECT r.id, sg.printed_name, cv.label FROM validation_runs r
     JOIN cohort_versions cv ON cv.id = r.cohort_version_id
     JOIN signatures sg ON sg.run_id = r.id
     JOIN score_versions sv ON sv.id = r.score_version_id JOIN scores s ON s.id = sv.score_id
     WHERE s.name = $1 AND r.status = 'completed' ORDER BY sg.signed_at LIMIT 1`,
    [KESTREL_SCORE_NAME],
  );
  expect(rows.length, 'the demo seed has a signed run').toBe(1);
  runId = rows[0].id;
  signerName = rows[0].printed_name;
  cohortLabel = rows[0].label;
});

// A4 at 96 CSS px per inch, less the report's 15 mm margins (@page in RunReportView.vue): 180 mm of content.
const A4_CONTENT_PX = Math.floor((180 / 25.4) * 96);
const SECTION_HEADINGS = [
  'Summary',
  'Score',
  'Cohort',
  'Methods',
  'Run settings',
  'Results',
  'Threshold table',
  'Subgroups',
  'Periods',
  'Review',
  'Signature manifest',
  'Reporting checklist',
];

/** Width and height of a binary PGM (P5) picture, and its grey values. */
function readPgm(file: string): { width: number; height: number; pixels: Buffer } {
  const buf = readFileSync(file);
  const header = buf
    .subarray(0, 64)
    .toString('latin1')
    .match(/^P5\s+(\d+)\s+(\d+)\s+(\d+)\s/);
  if (!header) throw new Error(`${file} is not a binary PGM`);
  return { width: Number(header[1]), height: Number(header[2]), pixels: buf.subarray(header[0].length) };
}

/** PNG width from its IHDR chunk (bytes 16–19). */
const pngWidth = (file: string) => readFileSync(file).readUInt32BE(16);

describe('the validation report, printed', () => {
  it('prints to PDF with every section, no menu, nothing past the right edge, and a checklist that matches the report', () =>
    inTab(
      browser(),
      'report-print',
      async (page) => {
        await page.goto(`${appUrl}/runs/${runId}/report`);
        await page.getByRole('heading', { name: /Reporting checklist/ }).waitFor();
        await page.locator('[data-report-part="results"] canvas').first().waitFor();

        // The checklist against the rendered report: an item is "present" exactly when every part it names is on the page.
        const checklist = await page.evaluate(() =>
          [...document.querySelectorAll<HTMLElement>('[data-checklist-item]')].map((row) => {
            const parts = (row.dataset.parts ?? '').split(' ').filter(Boolean);
            const rendered = parts.map((p) => {
              const el = document.querySelector<HTMLElement>(`[data-report-part="${p}"]`);
              return !!el && el.innerText.trim().length > 0;
            });
            return {
              code: row.dataset.checklistItem,
              claimed: row.dataset.present === 'true',
              shown: parts.length > 0 && rendered.every(Boolean),
              parts,
            };
          }),
        );
        expect(checklist.length).toBeGreaterThan(20);
        for (const c of checklist)
          expect(c.claimed, `checklist item ${c.code} (${c.parts.join(', ') || 'not recorded'})`).toBe(c.shown);
        // This run has thresholds, subgroups, monthly periods and a review: those items must be present (seeds/runs.ts settings).
        for (const code of ['11', '13b', '16', '18'])
          expect(checklist.find((c) => c.code === code)?.claimed, `item ${code}`).toBe(true);

        // "Predicted risk by outcome" once; the settings as named settings in words, not JSON.
        await expect.poll(() => page.getByText('Predicted risk by outcome', { exact: true }).count()).toBe(1);
        const settings = await page.locator('[data-report-part="settings"]').innerText();
        expect(settings).toMatch(
          /Decision-curve thresholds \(net benefit\)\s+1% to 50% in steps of 1% \(50 thresholds\)/,
        );
        expect(settings).not.toMatch(/[{}"]/);

        // Charts draw at twice the screen's pixels, so the printed bitmap is sharp.
        const ratios = await page.evaluate(() =>
          [...document.querySelectorAll('canvas')].map((c) => c.width / c.getBoundingClientRect().width),
        );
        expect(ratios.length).toBeGreaterThanOrEqual(3);
        for (const r of ratios) expect(r).toBeGreaterThanOrEqual(1.99);

        // Under print media at the width of an A4 page's content, nothing is wider than the page.
        await page.emulateMedia({ media: 'print' });
        await page.setViewportSize({ width: A4_CONTENT_PX, height: 1000 });
        const widths = await page.evaluate(() => ({
          scroll: document.documentElement.scrollWidth,
          client: document.documentElement.clientWidth,
        }));
        expect(widths.scroll, 'content wider than an A4 page').toBeLessThanOrEqual(widths.client);
        expect(await page.locator('header.v-app-bar').isVisible(), 'the app bar prints').toBe(false);
        expect(await page.locator('nav.v-navigation-drawer').isVisible(), 'the navigation prints').toBe(false);

        const dir = mkdtempSync(path.join(os.tmpdir(), 'plumbline-report-'));
        try {
          const pdf = path.join(dir, 'report.pdf');
          await page.pdf({ path: pdf, preferCSSPageSize: true, printBackground: true });

          // Page pictures for people (tests/artifacts/report-page-NN.png) at 72 dpi: an A4 page is 595 px wide.
          for (const f of readdirSync(artifactsDir).filter((f) => f.startsWith('report-page-')))
            rmSync(path.join(artifactsDir, f));
          execFileSync('pdftoppm', ['-r', '72', '-png', pdf, path.join(artifactsDir, 'report-page')]);
          const pngs = readdirSync(artifactsDir).filter((f) => /^report-page-\d+\.png$/.test(f));
          expect(pngs.length).toBeGreaterThanOrEqual(5);
          for (const f of pngs) expect(pngWidth(path.join(artifactsDir, f)), f).toBe(595);

          // Nothing runs into the right margin: the outer 10 mm of every page (of its 15 mm margin) stays white.
          execFileSync('pdftoppm', ['-r', '50', '-gray', pdf, path.join(dir, 'grey')]);
          const greys = readdirSync(dir).filter((f) => f.endsWith('.pgm'));
          expect(greys.length).toBe(pngs.length);
          for (const f of greys) {
            const { width, height, pixels } = readPgm(path.join(dir, f));
            const band = Math.floor((10 / 25.4) * 50);
            let darkest = 255;
            for (let y = 0; y < height; y++)
              for (let x = width - band; x < width; x++) darkest = Math.min(darkest, pixels[y * width + x]);
            expect(darkest, `${f}: something printed in the right margin`).toBeGreaterThan(245);
          }

          const text = execFileSync('pdftotext', ['-layout', pdf, '-'], { encoding: 'utf8' });
          for (const h of SECTION_HEADINGS) expect(text, `section "${h}"`).toMatch(new RegExp(`^\\s*${h}`, 'm'));
          expect(text.match(/Predicted risk by outcome/g)?.length, '"Predicted risk by outcome" once').toBe(1);
          for (const menu of ['Score cards', 'Upload cohort', 'My account', 'Print / Save as PDF'])
            expect(text, `"${menu}" printed`).not.toContain(menu);

          // The cover: score, cohort, run hashes, review and signature manifest on page 1.
          const cover = execFileSync('pdftotext', ['-f', '1', '-l', '1', pdf, '-'], { encoding: 'utf8' });
          expect(cover).toContain(KESTREL_SCORE_NAME);
          expect(cover).toContain(cohortLabel);
          expect(cover).toMatch(/Results SHA-256\s+[0-9a-f]{64}/);
          expect(cover).toMatch(/fit for use|recalibrate first|not fit for use/);
          expect(cover.replace(/\s+/g, ' ')).toContain(signerName);
        } finally {
          rmSync(dir, { recursive: true, force: true });
        }
      },
      'statistician@demo.test',
    ));
});
