import type { MigrationInterface, QueryRunner } from 'typeorm';

/**
 * Which run of a cohort version the drift timeline takes for a score version, when the statistician chooses one;
 * without a row (or with run_id NULL) the newest completed run counts. One row per (score version, cohort version),
 * so a re-run never puts the same patients on the timeline twice. Each change is also an audit entry.
 */
export class DriftRunChoices1764900100000 implements MigrationInterface {
  name = 'DriftRunChoices1764900100000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE drift_run_choices (
        score_version_id uuid NOT NULL REFERENCES score_versions(id),
        cohort_version_id uuid NOT NULL REFERENCES cohort_versions(id),
        run_id uuid REFERENCES validation_runs(id),
        chosen_by uuid NOT NULL REFERENCES users(id),
        chosen_at timestamptz NOT NULL DEFAULT now(),
        PRIMARY KEY (score_version_id, cohort_version_id)
      )`);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE drift_run_choices');
  }
}
