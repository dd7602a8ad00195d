// A demo run that shows the site and subgroup analyses with intervals (invented data): Kestrel score version 2 on one
// Fernhollow quarter, whose patients were discharged from two fictional sites (Main campus and North annex), with the
// site column set and bootstrap replicates, so the site forest plots, the calibration curves by group, the calibration
// band and the bootstrap CIs all show in the browser. Computed by the same function the run queue uses. Idempotent.
import { runSettingsSchema, type RunSettings } from '@shared/runs';
import { dataSource } from '../../platform/database/dataSource';
import { recordRunNow } from '../../domain/runs/runQueue';
import { logger } from '../../platform/observability/log';
import { DEMO_COHORT_NAME, KESTREL_SCORE_NAME } from './cohorts';

/** The quarter it runs on: neither of the two newest (the seeded review and sign-off are on those). */
export const DEMO_SITE_RUN_QUARTER = '2025-Q2';

/** 200 replicates keep the seed to a few seconds on a 2,000-patient quarter. */
export const DEMO_SITE_RUN_SETTINGS: RunSettings = runSettingsSchema.parse({
  subgroupColumns: ['sex', 'age_band', 'unit'],
  siteColumn: 'site',
  bootstrapReplicates: 200,
  bootstrapSeed: 20250401,
  timeGrouping: 'month',
});

export async function seedSiteRun(): Promise<void> {
  const [target]: { score_version_id: string; cohort_version_id: string }[] = await dataSource.query(
    `SELECT sv.id AS score_version_id, cv.id AS cohort_version_id
     FROM score_versions sv JOIN scores s ON s.id = sv.score_id, cohort_versions cv JOIN cohorts c ON c.id = cv.cohort_id
     WHERE s.name = $1 AND sv.version = 2 AND c.name = $2 AND cv.label = $3`,
    [KESTREL_SCORE_NAME, DEMO_COHORT_NAME, DEMO_SITE_RUN_QUARTER],
  );
  if (!target) {
    logger.warn(`seedSiteRun: Kestrel version 2 or the demo quarter ${DEMO_SITE_RUN_QUARTER} not found; skipped`);
    return;
  }
  const done = await dataSource.query(
    `SELECT 1 FROM validation_runs WHERE score_version_id = $1 AND cohort_version_id = $2 AND status = 'completed'
       AND settings->>'siteColumn' IS NOT NULL AND (settings->>'bootstrapReplicates')::int > 0 LIMIT 1`,
    [target.score_version_id, target.cohort_version_id],
  );
  if (done.length) return;
  const [statistician]: { id: string }[] = await dataSource.query(
    `SELECT id FROM users WHERE email = 'statistician@demo.test'`,
  );
  await recordRunNow(
    statistician?.id ?? null,
    target.score_version_id,
    target.cohort_version_id,
    DEMO_SITE_RUN_SETTINGS,
    { seeded: true },
  );
  logger.info(`[seed] runs: a demo run by site with bootstrap replicates computed on ${DEMO_SITE_RUN_QUARTER}`);
}
