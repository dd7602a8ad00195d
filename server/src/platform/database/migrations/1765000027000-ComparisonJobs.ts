import type { MigrationInterface, QueryRunner } from 'typeorm';
import { JOB_SCHEMA } from './1764900000000-JobQueue';

/**
 * A score comparison is computed by a job ('comparison', retried once after a crash, then handed to
 * 'comparison-abandoned', which marks it failed), as runs are. Its row is stored queued and moves only forward:
 * running (progress may rise), then completed with its results and hashes or failed with its error; a completed or
 * failed row never changes again and no row is deleted. Rows stored before were completed in their request.
 */
export class ComparisonJobs1765000027000 implements MigrationInterface {
  name = 'ComparisonJobs1765000027000';

  async up(q: QueryRunner): Promise<void> {
    // The old guard refuses every UPDATE, the back-fill below included.
    await q.query('DROP TRIGGER score_comparisons_append_only ON score_comparisons');
    await q.query(`
      ALTER TABLE score_comparisons
        ADD COLUMN status varchar(20) NOT NULL DEFAULT 'completed'
          CHECK (status IN ('queued', 'running', 'completed', 'failed')),
        ADD COLUMN error text,
        ADD COLUMN progress real NOT NULL DEFAULT 1 CHECK (progress >= 0 AND progress <= 1),
        ADD COLUMN completed_at timestamptz`);
    await q.query('UPDATE score_comparisons SET completed_at = created_at');
    await q.query(`
      ALTER TABLE score_comparisons
        ALTER COLUMN status SET DEFAULT 'queued',
        ALTER COLUMN progress SET DEFAULT 0,
        ALTER COLUMN results DROP NOT NULL,
        ALTER COLUMN engine_version DROP NOT NULL,
        ALTER COLUMN inputs_sha256 DROP NOT NULL,
        ALTER COLUMN results_sha256 DROP NOT NULL`);
    // A completed comparison always carries its results and the hashes that make it reproducible; a failed one its
    // reason; one still waiting or computing neither (completed_at: when it ended, either way).
    await q.query(`
      ALTER TABLE score_comparisons ADD CONSTRAINT score_comparisons_outcome CHECK (CASE status
        WHEN 'completed' THEN results IS NOT NULL AND engine_version IS NOT NULL AND inputs_sha256 IS NOT NULL
          AND results_sha256 IS NOT NULL AND completed_at IS NOT NULL AND error IS NULL
        WHEN 'failed' THEN error IS NOT NULL AND results IS NULL AND completed_at IS NOT NULL
        ELSE results IS NULL AND results_sha256 IS NULL AND error IS NULL AND completed_at IS NULL END)`);
    await q.query(
      `CREATE INDEX score_comparisons_waiting_idx ON score_comparisons (created_at) WHERE status IN ('queued', 'running')`,
    );
    await q.query(`
      CREATE FUNCTION plumbline_comparison_guard() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP = 'DELETE' THEN
          RAISE EXCEPTION 'plumbline: DELETE on score_comparisons is not allowed (append-only record)' USING ERRCODE = 'P0001';
        END IF;
        IF OLD.status IN ('completed', 'failed') THEN
          RAISE EXCEPTION 'plumbline: score comparison % is % and its record is append-only', OLD.id, OLD.status
            USING ERRCODE = 'P0001';
        END IF;
        IF NEW.id IS DISTINCT FROM OLD.id OR NEW.first_score_version_id IS DISTINCT FROM OLD.first_score_version_id
            OR NEW.second_score_version_id IS DISTINCT FROM OLD.second_score_version_id
            OR NEW.cohort_version_id IS DISTINCT FROM OLD.cohort_version_id OR NEW.settings IS DISTINCT FROM OLD.settings
            OR NEW.created_by IS DISTINCT FROM OLD.created_by OR NEW.created_at IS DISTINCT FROM OLD.created_at THEN
          RAISE EXCEPTION 'plumbline: what score comparison % compares is fixed when it is queued', OLD.id
            USING ERRCODE = 'P0001';
        END IF;
        -- Forward only: queued -> running -> completed | failed (queued may end at once), progress never falls.
        IF (OLD.status = 'running' AND NEW.status = 'queued') OR NEW.progress < OLD.progress THEN
          RAISE EXCEPTION 'plumbline: score comparison % only moves forward (% to %)', OLD.id, OLD.status, NEW.status
            USING ERRCODE = 'P0001';
        END IF;
        RETURN NEW;
      END $$`);
    await q.query(`
      CREATE TRIGGER score_comparisons_guard BEFORE UPDATE OR DELETE ON score_comparisons
      FOR EACH ROW EXECUTE FUNCTION plumbline_comparison_guard()`);

    // The job queues, as the owner (creating a queue creates its partition table); settings as the run queues'.
    for (const [name, settings] of [
      ['comparison-abandoned', { retryLimit: 2, retryDelay: 10, deadLetter: null }],
      ['comparison', { retryLimit: 1, retryDelay: 0, deadLetter: 'comparison-abandoned' }],
    ] as const)
      await q.query(`SELECT ${JOB_SCHEMA}.create_queue($1, $2::json)`, [
        name,
        JSON.stringify({ policy: 'standard', retryBackoff: false, ...settings }),
      ]);
  }

  async down(q: QueryRunner): Promise<void> {
    // A queue's jobs refer to it; the comparisons they would compute are deleted below.
    for (const name of ['comparison', 'comparison-abandoned']) {
      await q.query(`DELETE FROM ${JOB_SCHEMA}.job WHERE name = $1`, [name]);
      await q.query(`SELECT ${JOB_SCHEMA}.delete_queue($1)`, [name]);
    }
    await q.query('DROP TRIGGER score_comparisons_guard ON score_comparisons');
    await q.query('DROP FUNCTION plumbline_comparison_guard');
    // Comparisons that never completed had no place in the table before; reviews only name completed ones.
    await q.query(`DELETE FROM score_comparisons WHERE status <> 'completed'`);
    await q.query('DROP INDEX score_comparisons_waiting_idx');
    await q.query('ALTER TABLE score_comparisons DROP CONSTRAINT score_comparisons_outcome');
    await q.query(`
      ALTER TABLE score_comparisons
        DROP COLUMN status, DROP COLUMN error, DROP COLUMN progress, DROP COLUMN completed_at,
        ALTER COLUMN results SET NOT NULL,
        ALTER COLUMN engine_version SET NOT NULL,
        ALTER COLUMN inputs_sha256 SET NOT NULL,
        ALTER COLUMN results_sha256 SET NOT NULL`);
    await q.query(`
      CREATE TRIGGER score_comparisons_append_only BEFORE UPDATE OR DELETE ON score_comparisons
      FOR EACH ROW EXECUTE FUNCTION plumbline_refuse_change()`);
  }
}
