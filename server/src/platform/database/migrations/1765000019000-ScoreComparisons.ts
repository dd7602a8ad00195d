import type { MigrationInterface, QueryRunner } from 'typeorm';

/**
 * Score comparisons: two score versions on the same patients of one cohort version (paired AUC test, net-benefit
 * differences). Stored once computed and never changed. A review may name the comparison it relied on.
 */
export class ScoreComparisons1765000019000 implements MigrationInterface {
  name = 'ScoreComparisons1765000019000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE score_comparisons (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        first_score_version_id uuid NOT NULL REFERENCES score_versions(id),
        second_score_version_id uuid NOT NULL REFERENCES score_versions(id),
        cohort_version_id uuid NOT NULL REFERENCES cohort_versions(id),
        settings jsonb NOT NULL,
        results jsonb NOT NULL,
        engine_version varchar(40) NOT NULL,
        inputs_sha256 char(64) NOT NULL,
        results_sha256 char(64) NOT NULL,
        created_by uuid REFERENCES users(id),
        created_at timestamptz NOT NULL DEFAULT now(),
        CHECK (first_score_version_id <> second_score_version_id)
      )`);
    await q.query(`CREATE INDEX score_comparisons_cohort_idx ON score_comparisons (cohort_version_id)`);
    await q.query(`
      CREATE TRIGGER score_comparisons_append_only BEFORE UPDATE OR DELETE ON score_comparisons
      FOR EACH ROW EXECUTE FUNCTION plumbline_refuse_change()`);

    await q.query(`ALTER TABLE run_reviews ADD COLUMN comparison_id uuid REFERENCES score_comparisons(id)`);
    // The review guard of its own time, now also keeping the named comparison.
    await q.query(`
      CREATE OR REPLACE FUNCTION plumbline_review_guard() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP = 'DELETE' THEN
          RAISE EXCEPTION 'plumbline: DELETE on run_reviews is not allowed (append-only record)' USING ERRCODE = 'P0001';
        END IF;
        IF OLD.superseded_by IS NOT NULL OR NEW.superseded_by IS NULL
            OR NEW.id IS DISTINCT FROM OLD.id OR NEW.run_id IS DISTINCT FROM OLD.run_id
            OR NEW.verdict IS DISTINCT FROM OLD.verdict OR NEW.reasoning IS DISTINCT FROM OLD.reasoning
            OR NEW.reviewer_id IS DISTINCT FROM OLD.reviewer_id OR NEW.created_at IS DISTINCT FROM OLD.created_at
            OR NEW.comparison_id IS DISTINCT FROM OLD.comparison_id THEN
          RAISE EXCEPTION 'plumbline: a review is immutable; only its superseded_by link may be set, once' USING ERRCODE = 'P0001';
        END IF;
        RETURN NEW;
      END $$`);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('ALTER TABLE run_reviews DROP COLUMN comparison_id');
    await q.query('DROP TABLE score_comparisons');
  }
}
