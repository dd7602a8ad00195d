// A cohort version with gaps in its predictors, stored by storeCohortRows (tests/helpers/fixtures.ts) through the same
// block encoding and COPY the upload uses: a test fixture, not a product path. A numeric gap is stored as NaN and a text
// gap as a missing code, so loadCohortData hands the run a NaN or a null; the run treats both as missing. Invented data.
import { randomUUID } from 'node:crypto';
import { kestrelRows, mulberry32, storeCohortRows, type CohortFixture, type GapRow } from './fixtures';

export type { GapRow };

export async function createCohortWithGaps(
  rows: GapRow[],
  opts: { name?: string } = {},
): Promise<CohortFixture & { gapRows: GapRow[] }> {
  const stored = await storeCohortRows(rows, {
    name: opts.name ?? `Fixture cohort with gaps ${randomUUID().slice(0, 8)}`,
    label: 'fixture with gaps',
  });
  return { ...stored, rows: [], gapRows: rows };
}

/**
 * Invented Kestrel patients with gaps missing at random: charlson_index far more often missing for patients with the
 * event, length_of_stay more often for older patients, emergency_admission now and then.
 */
export function kestrelRowsWithGaps(n: number, seed: number): GapRow[] {
  const r = mulberry32(seed + 1000);
  return kestrelRows(n, seed).map((row) => {
    const p: GapRow['predictors'] = { ...row.predictors };
    if (r() < (row.outcome ? 0.45 : 0.08)) p.charlson_index = null;
    if (r() < (Number(p.age) > 70 ? 0.25 : 0.05)) p.length_of_stay = null;
    if (r() < 0.06) p.emergency_admission = null;
    return { ...row, predictors: p };
  });
}
