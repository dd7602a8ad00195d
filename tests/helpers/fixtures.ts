// Minimal registry fixtures written straight to the database (score + version, cohort + version + rows), so a
// suite can run validations without going through the score and cohort upload APIs. Invented data only.
import { createHash, randomUUID } from 'node:crypto';
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import type { PoolClient } from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import type { ScoreModel } from '@shared/model';
import { dataSource } from '../../server/src/platform/database/dataSource';
import { KESTREL_V1_MODEL } from '../../server/src/demo/seeds/scenario';
import { COPY_BLOCKS_SQL, encodeBlocks } from '../../server/src/domain/cohorts/cohortBlocks';
import { mulberry32 } from '../../server/src/stats/bootstrap';

/** The invented Kestrel formula (version 1 of the demo scenario). */
export const FIXTURE_MODEL: ScoreModel = KESTREL_V1_MODEL;

export interface ScoreFixture {
  scoreId: string;
  scoreVersionId: string;
  model: ScoreModel | null;
}

export async function createScoreFixture(
  opts: { model?: ScoreModel; mode?: 'formula' | 'supplied'; probabilityColumn?: string; name?: string } = {},
): Promise<ScoreFixture> {
  const mode = opts.mode ?? 'formula';
  const model = mode === 'formula' ? (opts.model ?? FIXTURE_MODEL) : null;
  const scores: { id: string }[] = await dataSource.query(
    `INSERT INTO scores (name, outcome_definition, time_horizon, intended_population, citation, caution_text)
     VALUES ($1, 'unplanned readmission within 30 days (fixture)', '30 days', 'adults discharged alive (fixture)',
             'Invented fixture citation, not a real publication', 'Fixture caution text.') RETURNING id`,
    [opts.name ?? `Fixture score ${randomUUID().slice(0, 8)}`],
  );
  const versions: { id: string }[] = await dataSource.query(
    `INSERT INTO score_versions (score_id, version, mode, model, probability_column, change_note)
     VALUES ($1, 1, $2, $3::jsonb, $4, 'fixture') RETURNING id`,
    [
      scores[0].id,
      mode,
      model ? JSON.stringify(model) : null,
      mode === 'supplied' ? (opts.probabilityColumn ?? 'risk') : null,
    ],
  );
  return { scoreId: scores[0].id, scoreVersionId: versions[0].id, model };
}

export interface FixtureRow {
  outcome: 0 | 1;
  eventDate?: string | null;
  predictors: Record<string, number | string>;
  subgroups?: Record<string, string>;
}

export interface CohortFixture {
  cohortId: string;
  cohortVersionId: string;
  rows: FixtureRow[];
}

/** A patient whose predictors may have gaps (null): stored as the upload stores a gap the steward allowed. */
export interface GapRow {
  outcome: 0 | 1;
  eventDate?: string | null;
  predictors: Record<string, number | string | null>;
  subgroups?: Record<string, string>;
}

export async function createCohortFixture(
  rows: FixtureRow[],
  opts: { name?: string; label?: string; periodStart?: string; periodEnd?: string } = {},
): Promise<CohortFixture> {
  return { ...(await storeCohortRows(rows, opts)), rows };
}

/**
 * Stores invented rows as one cohort version, through the same block encoding and COPY the upload check uses
 * (server/src/domain/cohorts/cohortBlocks.ts). A gap (null) is stored as the upload stores one the steward allowed: NaN
 * in a numeric column, the missing code in a text column, and the column named in the mapping's predictorsWithGaps.
 */
export async function storeCohortRows(
  rows: GapRow[],
  opts: { name?: string; label?: string; periodStart?: string; periodEnd?: string } = {},
): Promise<{ cohortId: string; cohortVersionId: string }> {
  const body = JSON.stringify(rows);
  const cohorts: { id: string }[] = await dataSource.query(
    `INSERT INTO cohorts (name, description) VALUES ($1, 'fixture') RETURNING id`,
    [opts.name ?? `Fixture cohort ${randomUUID().slice(0, 8)}`],
  );
  const events = rows.reduce((s, r) => s + r.outcome, 0);
  // As an upload stores them: the blocks first (the database refuses blocks for a version already stored), then the version.
  const id = randomUUID();
  const names = Object.keys(rows[0]?.predictors ?? {});
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
    `INSERT INTO cohort_versions (id, cohort_id, version, label, source_filename, source_sha256, source_bytes, row_count, events, mapping, period_start, period_end)
     VALUES ($1, $2, 1, $3, 'fixture.csv', $4, $5, $6, $7, $8::jsonb, $9, $10)`,
    [
      id,
      cohorts[0].id,
      opts.label ?? 'fixture',
      createHash('sha256').update(body).digest('hex'),
      Buffer.byteLength(body),
      rows.length,
      events,
      JSON.stringify(gapColumns.length ? { predictorsWithGaps: gapColumns } : {}),
      opts.periodStart ?? null,
      opts.periodEnd ?? null,
    ],
  );
  return { cohortId: cohorts[0].id, cohortVersionId: id };
}

/** The engine's seeded PRNG (mulberry32), so fixture cohorts are the same on every run. */
export { mulberry32 };

/**
 * Invented patients drawn from the fixture formula plus `logitShift` on the logit scale (miscalibration on purpose),
 * discharged across `months` months starting January 2024.
 */
export function kestrelRows(n: number, seed = 1, opts: { logitShift?: number; months?: number } = {}): FixtureRow[] {
  const rnd = mulberry32(seed);
  const months = opts.months ?? 6;
  const rows: FixtureRow[] = [];
  for (let i = 0; i < n; i++) {
    const age = 18 + Math.floor(rnd() * 75);
    const los = 1 + Math.floor(-Math.log(1 - rnd()) * 4);
    const prior = Math.floor(-Math.log(1 - rnd()) * 1.2);
    const emergency = rnd() < 0.6 ? 'yes' : 'no';
    const charlson = Math.floor(rnd() * 8);
    const lp =
      -3.6 +
      0.012 * age +
      0.35 * Math.log(los) +
      0.28 * prior +
      (emergency === 'yes' ? 0.45 : 0) +
      0.11 * charlson +
      (opts.logitShift ?? 0);
    const outcome = rnd() < 1 / (1 + Math.exp(-lp)) ? 1 : 0;
    const month = Math.floor(rnd() * months);
    const day = 1 + Math.floor(rnd() * 28);
    const date = new Date(Date.UTC(2024, month, day)).toISOString().slice(0, 10);
    rows.push({
      outcome,
      eventDate: date,
      predictors: {
        age,
        length_of_stay: los,
        prior_admissions: prior,
        emergency_admission: emergency,
        charlson_index: charlson,
      },
      subgroups: {
        sex: rnd() < 0.5 ? 'female' : 'male',
        unit: ['Birch', 'Cedar', 'Alder', 'Rowan', 'Small'][rnd() < 0.006 ? 4 : Math.floor(rnd() * 4)],
      },
    });
  }
  return rows;
}
