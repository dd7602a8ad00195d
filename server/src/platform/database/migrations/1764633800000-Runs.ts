import type { MigrationInterface, QueryRunner } from 'typeorm';

/** Validation runs: the persisted job queue and, once completed, the immutable result record. */
export class Runs1764633800000 implements MigrationInterface {
  name = 'Runs1764633800000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE validation_runs (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        score_version_id uuid NOT NULL REFERENCES score_versions(id),
        cohort_version_id uuid NOT NULL REFERENCES cohort_versions(id),
        settings jsonb NOT NULL,
        status varchar(20) NOT NULL DEFAULT 'queued' CHECK (status IN ('queued', 'running', 'completed', 'failed')),
        progress real NOT NULL DEFAULT 0 CHECK (progress >= 0 AND progress <= 1),
        progress_message text,
        error text,
        results jsonb,
        engine_version varchar(40),
        inputs_sha256 char(64),
        results_sha256 char(64),
        created_by uuid REFERENCES users(id),
        created_at timestamptz NOT NULL DEFAULT now(),
        started_at timestamptz,
        finished_at timestamptz,
        attempt integer NOT NULL DEFAULT 1 CHECK (attempt >= 1),
        -- A completed run always carries its results and the hashes that make it reproducible.
        CHECK (status <> 'completed' OR (results IS NOT NULL AND engine_version IS NOT NULL
          AND inputs_sha256 IS NOT NULL AND results_sha256 IS NOT NULL AND finished_at IS NOT NULL)),
        CHECK (status <> 'failed' OR error IS NOT NULL)
      )`);
    await q.query(`CREATE INDEX validation_runs_queue_idx ON validation_runs (created_at) WHERE status = 'queued'`);
    await q.query(`CREATE INDEX validation_runs_score_version_idx ON validation_runs (score_version_id)`);
    await q.query(`CREATE INDEX validation_runs_cohort_version_idx ON validation_runs (cohort_version_id)`);
    // Completed (and failed) runs are final records: no UPDATE at all; a completed run can never be deleted.
    await q.query(`
      CREATE FUNCTION plumbline_run_guard() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP = 'DELETE' THEN
          IF OLD.status = 'completed' THEN
            RAISE EXCEPTION 'plumbline: validation run % is completed and cannot be deleted', OLD.id USING ERRCODE = 'P0001';
          END IF;
          RETURN OLD;
        END IF;
        IF OLD.status IN ('completed', 'failed') THEN
          RAISE EXCEPTION 'plumbline: validation run % is % and its record is immutable', OLD.id, OLD.status USING ERRCODE = 'P0001';
        END IF;
        RETURN NEW;
      END $$`);
    await q.query(`
      CREATE TRIGGER validation_runs_guard BEFORE UPDATE OR DELETE ON validation_runs
      FOR EACH ROW EXECUTE FUNCTION plumbline_run_guard()`);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE validation_runs');
    await q.query('DROP FUNCTION plumbline_run_guard');
  }
}
