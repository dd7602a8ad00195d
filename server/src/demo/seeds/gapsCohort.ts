// A demo cohort with gaps (invented): Fernhollow's coding team left some Charlson indexes and prior-admission counts
// blank, and not at random by chance alone — the blanks depend on what else was recorded (missing at random):
//  - the Charlson index is coded from the discharge summary, which is thinner after a short emergency stay, and is
//    reviewed (so coded) more often when the patient comes back within 30 days;
//  - prior admissions come from the main campus's own record; the North annex's older system is often not linked.
// Stored through the same path a steward's upload takes, with both columns marked as allowed to have gaps.
import { mkdtemp, rm, stat } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import path from 'node:path';
import type { ColumnMappingSpec } from '@shared/cohorts';
import { dataSource } from '../../platform/database/dataSource';
import { applyMapping, commitUpload, createUpload, getUpload, whenProcessed } from '../../domain/cohorts/uploads';
import { logger } from '../../platform/observability/log';
import { KESTREL_MAPPING, KESTREL_SCORE_NAME, writeLines } from './cohorts';
import { KESTREL_HEADER, kestrelQuarterCsv, seededRandom, type QuarterSpec } from './kestrelData';

export const GAPS_COHORT_NAME = 'Fernhollow discharges with coding gaps (invented demo data)';
export const GAPS_COLUMNS = ['charlson_index', 'prior_admissions'];
export const GAPS_MAPPING: ColumnMappingSpec = { ...KESTREL_MAPPING, predictorsWithGaps: GAPS_COLUMNS };

const col = (name: string) => KESTREL_HEADER.indexOf(name);
const expit = (x: number) => 1 / (1 + Math.exp(-x));

/** A quarter of invented Kestrel patients with the blanks described above (header first); seeded, so always the same. */
export function* kestrelGapsCsv(q: QuarterSpec): Generator<string> {
  const rand = seededRandom(q.seed + 7919);
  let first = true;
  for (const line of kestrelQuarterCsv(q)) {
    if (first) {
      first = false;
      yield line;
      continue;
    }
    const cells = line.split(',');
    const emergency = cells[col('emergency_admission')] === 'yes';
    const shortStay = Number(cells[col('length_of_stay')]) <= 3;
    const readmitted = cells[col('readmitted_30d')] === 'yes';
    // Charlson blank: about 1 in 10 after a planned stay, 1 in 3 after a short emergency stay, fewer when readmitted.
    if (rand() < expit(-2.3 + 1.0 * (emergency ? 1 : 0) + 0.7 * (shortStay ? 1 : 0) - 1.0 * (readmitted ? 1 : 0)))
      cells[col('charlson_index')] = '';
    // Prior admissions blank: a quarter of the North annex's patients, few on the main campus.
    if (rand() < (cells[col('site')] === 'North annex' ? 0.25 : 0.03)) cells[col('prior_admissions')] = '';
    yield cells.join(',');
  }
}

export const GAPS_QUARTER: QuarterSpec = { year: 2026, quarter: 1, index: 8, n: 1800, seed: 4242 };

/** The cohort with gaps, one version (2026-Q1). Idempotent; needs the Kestrel score (seedKestrelScore) and the steward. */
export async function seedGapsCohort(): Promise<void> {
  const [sv]: { id: string }[] = await dataSource.query(
    `SELECT sv.id FROM score_versions sv JOIN scores s ON s.id = sv.score_id WHERE s.name = $1 ORDER BY sv.version DESC LIMIT 1`,
    [KESTREL_SCORE_NAME],
  );
  if (!sv) {
    logger.warn(`seedGapsCohort: score "${KESTREL_SCORE_NAME}" not found; the cohort with gaps is skipped`);
    return;
  }
  if ((await dataSource.query('SELECT 1 FROM cohorts WHERE name = $1', [GAPS_COHORT_NAME])).length) return;
  const [steward] = await dataSource.query(`SELECT id, email, name, role FROM users WHERE email = 'steward@demo.test'`);
  if (!steward) throw new Error('seedGapsCohort: the demo steward account is missing');
  const dir = await mkdtemp(path.join(tmpdir(), 'plumbline-seed-gaps-'));
  try {
    const name = 'fernhollow-coding-gaps-2026-Q1.csv';
    const file = path.join(dir, name);
    const sha256 = await writeLines(file, kestrelGapsCsv(GAPS_QUARTER));
    const { upload } = await createUpload(
      steward,
      { path: file, originalName: name, sha256, bytes: (await stat(file)).size },
      {
        scoreVersionId: sv.id,
        cohortName: GAPS_COHORT_NAME,
        label: '2026-Q1',
        periodStart: '2026-01-01',
        periodEnd: '2026-03-31',
      },
      'seed',
    );
    await applyMapping(steward, upload.id, GAPS_MAPPING, 'seed');
    await whenProcessed(upload.id);
    const checked = await getUpload(upload.id);
    if (checked.status !== 'checked')
      throw new Error(`seedGapsCohort: the upload ended ${checked.status}: ${checked.error}`);
    await commitUpload(steward, upload.id, true, 'seed');
    logger.info(
      `[seed] cohort with gaps: ${checked.rowsAccepted} patients, ${checked.missingness?.rowsWithGaps ?? 0} with a gap`,
    );
  } finally {
    await rm(dir, { recursive: true, force: true });
  }
}
