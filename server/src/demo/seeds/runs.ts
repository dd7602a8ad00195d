// Demo validation runs (invented data): Kestrel score version 2 on each of the eight demo quarters, computed here
// synchronously by the same function the run queue uses, stored completed with their hashes. Idempotent.
import { runSettingsSchema } from '@shared/runs';
import { dataSource } from '../../platform/database/dataSource';
import { recordRunNow } from '../../domain/runs/runQueue';
import { DEMO_COHORT_NAME, KESTREL_SCORE_NAME } from './cohorts';
import { logger } from '../../platform/observability/log';

const DEMO_GROUPS = ['sex', 'age_band', 'unit', 'site'];

export async function seedRuns(): Promise<void> {
  const sv: { id: string }[] = await dataSource.query(
    `SELECT sv.id FROM score_versions sv JOIN scores s ON s.id = sv.score_id WHERE s.name = $1 AND sv.version = 2`,
    [KESTREL_SCORE_NAME],
  );
  if (!sv.length) {
    logger.warn(`seedRuns: version 2 of "${KESTREL_SCORE_NAME}" not found; demo runs skipped`);
    return;
  }
  const versions: { id: string; label: string; groups: string[] | null }[] = await dataSource.query(
    `SELECT cv.id, cv.label,
            (SELECT b.sub_names FROM cohort_row_blocks b WHERE b.cohort_version_id = cv.id ORDER BY b.block_no LIMIT 1) AS groups
     FROM cohort_versions cv JOIN cohorts c ON c.id = cv.cohort_id
     WHERE c.name = $1 ORDER BY cv.period_start NULLS LAST, cv.version`,
    [DEMO_COHORT_NAME],
  );
  if (!versions.length) {
    logger.warn('seedRuns: no demo cohort versions; demo runs skipped');
    return;
  }
  const [statistician]: { id: string }[] = await dataSource.query(
    `SELECT id FROM users WHERE email = 'statistician@demo.test'`,
  );
  let made = 0;
  for (const cv of versions) {
    const done = await dataSource.query(
      `SELECT 1 FROM validation_runs WHERE score_version_id = $1 AND cohort_version_id = $2 AND status = 'completed' LIMIT 1`,
      [sv[0].id, cv.id],
    );
    if (done.length) continue;
    const present = cv.groups ?? [];
    const settings = runSettingsSchema.parse({
      subgroupColumns: DEMO_GROUPS.filter((g) => present.includes(g)),
      timeGrouping: 'month',
    });
    await recordRunNow(statistician?.id ?? null, sv[0].id, cv.id, settings, { seeded: true });
    made++;
  }
  logger.info(
    `[seed] runs: ${made} demo validation run${made === 1 ? '' : 's'} computed (${versions.length - made} already there)`,
  );
}
