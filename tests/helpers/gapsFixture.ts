// A cohort version with gaps in its predictors, written through the same block encoding and COPY the upload uses
// (server/src/domain/cohorts/cohortBlocks.ts), as createCohortFixture does: a test fixture, not a product path. A
// numeric gap is stored as NaN (what a float8 holds) and a text gap as a missing code, so loadCohortData hands the run
// a NaN or a null; the run treats both as missing. Invented data only.
import { createHash, randomUUID } from 'node:crypto';
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import type { PoolClient } from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import { dataSource } from '../../server/src/platform/database/dataSource';
import { COPY_BLOCKS_SQL, encodeBlocks } from '../../server/src/domain/cohorts/cohortBlocks';
import { kestrelRows, mulberry32, type CohortFixture } from './fixtures';

export interface GapRow {
  outcome: 0 | 1;
  eventDate?: string | null;
  predictors: Record<string, number | string | null>;
  subgroups?: Record<string, string>;
}

export async function createCohortWithGaps(
  rows: GapRow[],
  opts: { name?: string } = {},
): Promise<CohortFixture & { gapRows: GapRow[] }> {
  const body = JSON.stringify(rows);
  const cohorts: { id: string }[] = await dataSource.query(
    `INSERT INTO cohorts (name, description) VALUES ($1, 'fixture with gaps') RETURNING id`,
    [opts.name ?? `Fixture cohort with gaps ${randomUUID().slice(0, 8)}`],
  );
  const id = randomUUID();
  const names = Object.keys(rows[0].predictors);
  const firstValue = (k: string) => rows.find((r) => r.predictors[k] !== null)?.predictors[k];
  const num = names.filter((k) => typeof firstValue(k) === 'number');
  const cat = names.filter((k) => typeof firstValue(k) !== 'number');
  const sub = [...new Set(rows.flatMap((r) => Object.keys(r.subgroups ?? {})))];
  const gapColumns = names.filter((k) => rows.some((r) => r.predictors[k] === null));
  const text = encodeBlocks(
    id,
    { num, cat, sub },
    rows.map((r, i) => ({
      line: i + 1,
      outcome: r.outcome,
      date: r.eventDate ?? null,
      num: num.map((k) => (r.predictors[k] === null ? NaN : Number(r.predictors[k]))),
      // a null level is written as the missing code, as the block format does for subgroups
      cat: cat.map((k) => (r.predictors[k] === null ? null : String(r.predictors[k]))) as string[],
      sub: sub.map((k) => r.subgroups?.[k] ?? null),
    })),
  );
  const qr = dataSource.createQueryRunner();
  try {
    await qr.connect();
    const client = (qr as unknown as { databaseConnection: PoolClient }).databaseConnection;
    await pipeline(Readable.from([text]), client.query(copyFrom(COPY_BLOCKS_SQL)));
  } finally {
    await qr.release();
  }
  await dataSource.query(
    `INSERT INTO cohort_versions (id, cohort_id, version, label, source_filename, source_sha256, source_bytes, row_count, events, mapping)
     VALUES ($1, $2, 1, 'fixture with gaps', 'fixture.csv', $3, $4, $5, $6, $7::jsonb)`,
    [
      id,
      cohorts[0].id,
      createHash('sha256').update(body).digest('hex'),
      Buffer.byteLength(body),
      rows.length,
      rows.reduce((s, r) => s + r.outcome, 0),
      JSON.stringify({ predictorsWithGaps: gapColumns }),
    ],
  );
  return { cohortId: cohorts[0].id, cohortVersionId: id, rows: [], gapRows: rows };
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
