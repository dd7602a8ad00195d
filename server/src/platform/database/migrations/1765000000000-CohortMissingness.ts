import type { MigrationInterface, QueryRunner } from 'typeorm';

/**
 * Where the upload check keeps what it counted of missing values (per column, subgroup level and period, and the
 * predictors missing together): on the upload while it waits, then copied into the cohort version it becomes. Versions
 * stored before have none (NULL); their predictors had no gaps, since a gap was a rejected row then.
 */
export class CohortMissingness1765000000000 implements MigrationInterface {
  name = 'CohortMissingness1765000000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query('ALTER TABLE cohort_uploads ADD COLUMN missingness jsonb');
    await q.query('ALTER TABLE cohort_versions ADD COLUMN missingness jsonb');
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('ALTER TABLE cohort_versions DROP COLUMN missingness');
    await q.query('ALTER TABLE cohort_uploads DROP COLUMN missingness');
  }
}
