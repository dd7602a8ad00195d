// A demo run with multiple imputation on the demo cohort with gaps (seeds/gapsCohort.ts): its version (a version whose mapping names
// predictorsWithGaps), computed like every seeded run by recordRunNow. Idempotent: nothing happens when such a run
// exists or the demo has no version with gaps. The seed calls it after the cohorts with gaps are stored.
import { runSettingsSchema } from '@shared/runs';
import { DEFAULT_IMPUTATION_SEED, DEFAULT_IMPUTATIONS } from '@shared/missingData';
import { dataSource } from '../../platform/database/dataSource';
import { recordRunNow } from '../../domain/runs/runQueue';
import { logger } from '../../platform/observability/log';
import { KESTREL_SCORE_NAME } from './cohorts';
import { GAPS_COHORT_NAME } from './gapsCohort';

export async function seedDemoImputationRun(): Promise<string | null> {
  const [sv]: { id: string }[] = await dataSource.query(
    `SELECT sv.id FROM score_versions sv JOIN scores s ON s.id = sv.score_id WHERE s.name = $1 ORDER BY sv.version DESC LIMIT 1`,
    [KESTREL_SCORE_NAME],
  );
  const [cv]: { id: string; groups: string[] | null }[] = await dataSource.query(
    `SELECT cv.id, (SELECT b.sub_names FROM cohort_row_blocks b WHERE b.cohort_version_id = cv.id ORDER BY b.block_no LIMIT 1) AS groups
     FROM cohort_versions cv JOIN cohorts c ON c.id = cv.cohort_id
     WHERE c.name = $1 AND CASE WHEN jsonb_typeof(cv.mapping->'predictorsWithGaps') = 'array' THEN jsonb_array_length(cv.mapping->'predictorsWithGaps') ELSE 0 END > 0
     ORDER BY cv.period_start DESC NULLS LAST, cv.version DESC LIMIT 1`,
    [GAPS_COHORT_NAME],
  );
  if (!sv || !cv) {
    logger.info('[seed] imputation run: no demo cohort version with gaps; skipped');
    return null;
  }
  const done = await dataSource.query(
    `SELECT 1 FROM validation_runs WHERE score_version_id = $1 AND cohort_version_id = $2 AND status = 'completed'
       AND settings->'missingData'->>'method' = 'multiple-imputation' LIMIT 1`,
    [sv.id, cv.id],
  );
  if (done.length) return null;
  const [statistician]: { id: string }[] = await dataSource.query(
    `SELECT id FROM users WHERE email = 'statistician@demo.test'`,
  );
  const groups = cv.groups ?? [];
  const settings = runSettingsSchema.parse({
    subgroupColumns: ['sex', 'unit'].filter((g) => groups.includes(g)),
    missingData: {
      method: 'multiple-imputation',
      imputations: DEFAULT_IMPUTATIONS,
      iterations: 5,
      seed: DEFAULT_IMPUTATION_SEED,
      extraColumns: ['unit'].filter((g) => groups.includes(g)),
    },
  });
  const id = await recordRunNow(statistician?.id ?? null, sv.id, cv.id, settings, { seeded: true });
  logger.info('[seed] imputation run: a demo run with multiple imputation computed');
  return id;
}
