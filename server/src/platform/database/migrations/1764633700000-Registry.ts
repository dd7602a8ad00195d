import type { MigrationInterface, QueryRunner } from 'typeorm';

/** Scores, their immutable versions, cohorts and their immutable versions with the accepted rows. */
export class Registry1764633700000 implements MigrationInterface {
  name = 'Registry1764633700000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE scores (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        name varchar(160) NOT NULL UNIQUE,
        outcome_definition text NOT NULL,
        time_horizon varchar(120) NOT NULL,
        intended_population text NOT NULL,
        citation text NOT NULL,
        doi varchar(200),
        caution_text text NOT NULL,
        created_by uuid REFERENCES users(id),
        created_at timestamptz NOT NULL DEFAULT now(),
        updated_at timestamptz NOT NULL DEFAULT now()
      )`);
    await q.query(`
      CREATE TABLE score_versions (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        score_id uuid NOT NULL REFERENCES scores(id),
        version integer NOT NULL CHECK (version >= 1),
        mode varchar(20) NOT NULL CHECK (mode IN ('formula', 'supplied')),
        model jsonb,
        probability_column varchar(80),
        change_note text NOT NULL DEFAULT '',
        derived_from_run_id uuid,
        derivation jsonb,
        locked boolean NOT NULL DEFAULT false,
        clinical_status varchar(20) NOT NULL DEFAULT 'not approved'
          CHECK (clinical_status IN ('not approved', 'approved', 'revoked')),
        approved_run_id uuid,
        created_by uuid REFERENCES users(id),
        created_at timestamptz NOT NULL DEFAULT now(),
        UNIQUE (score_id, version),
        CHECK ((mode = 'formula' AND model IS NOT NULL) OR (mode = 'supplied' AND probability_column IS NOT NULL))
      )`);
    // Once a run uses a version its formula is frozen: only the clinical status may change, and never unlock.
    await q.query(`
      CREATE FUNCTION plumbline_score_version_guard() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP = 'DELETE' THEN
          IF OLD.locked THEN RAISE EXCEPTION 'plumbline: score version % is used by a run and cannot be deleted', OLD.id USING ERRCODE = 'P0001'; END IF;
          RETURN OLD;
        END IF;
        IF OLD.locked AND (NEW.model IS DISTINCT FROM OLD.model OR NEW.mode IS DISTINCT FROM OLD.mode
            OR NEW.probability_column IS DISTINCT FROM OLD.probability_column OR NEW.version IS DISTINCT FROM OLD.version
            OR NEW.score_id IS DISTINCT FROM OLD.score_id OR NEW.derived_from_run_id IS DISTINCT FROM OLD.derived_from_run_id
            OR NOT NEW.locked) THEN
          RAISE EXCEPTION 'plumbline: score version % is used by a run and is immutable; create a new version', OLD.id USING ERRCODE = 'P0001';
        END IF;
        RETURN NEW;
      END $$`);
    await q.query(`
      CREATE TRIGGER score_versions_guard BEFORE UPDATE OR DELETE ON score_versions
      FOR EACH ROW EXECUTE FUNCTION plumbline_score_version_guard()`);

    await q.query(`
      CREATE TABLE cohorts (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        name varchar(160) NOT NULL UNIQUE,
        description text NOT NULL DEFAULT '',
        score_id uuid REFERENCES scores(id),
        created_by uuid REFERENCES users(id),
        created_at timestamptz NOT NULL DEFAULT now()
      )`);
    await q.query(`
      CREATE TABLE column_mappings (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        name varchar(160) NOT NULL,
        cohort_id uuid REFERENCES cohorts(id),
        mapping jsonb NOT NULL,
        created_by uuid REFERENCES users(id),
        created_at timestamptz NOT NULL DEFAULT now()
      )`);
    await q.query(`
      CREATE TABLE cohort_versions (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        cohort_id uuid NOT NULL REFERENCES cohorts(id),
        version integer NOT NULL CHECK (version >= 1),
        label varchar(160) NOT NULL DEFAULT '',
        period_start date,
        period_end date,
        source_filename varchar(255) NOT NULL,
        source_sha256 char(64) NOT NULL,
        source_bytes bigint NOT NULL,
        row_count integer NOT NULL,
        events integer NOT NULL,
        excluded_count integer NOT NULL DEFAULT 0,
        exclusions jsonb NOT NULL DEFAULT '[]'::jsonb,
        mapping jsonb NOT NULL,
        column_summary jsonb NOT NULL DEFAULT '{}'::jsonb,
        uploaded_by uuid REFERENCES users(id),
        created_at timestamptz NOT NULL DEFAULT now(),
        UNIQUE (cohort_id, version)
      )`);
    await q.query(`
      CREATE TABLE cohort_rows (
        cohort_version_id uuid NOT NULL REFERENCES cohort_versions(id),
        line_no integer NOT NULL,
        outcome smallint NOT NULL CHECK (outcome IN (0, 1)),
        event_date date,
        predictors jsonb NOT NULL,
        subgroups jsonb NOT NULL DEFAULT '{}'::jsonb,
        PRIMARY KEY (cohort_version_id, line_no)
      )`);
    await q.query(`
      CREATE TRIGGER cohort_versions_immutable BEFORE UPDATE OR DELETE ON cohort_versions
      FOR EACH ROW EXECUTE FUNCTION plumbline_refuse_change()`);
    await q.query(`
      CREATE TRIGGER cohort_rows_immutable BEFORE UPDATE OR DELETE ON cohort_rows
      FOR EACH ROW EXECUTE FUNCTION plumbline_refuse_change()`);
  }

  async down(q: QueryRunner): Promise<void> {
    for (const t of ['cohort_rows', 'cohort_versions', 'column_mappings', 'cohorts', 'score_versions', 'scores'])
      await q.query(`DROP TABLE ${t}`);
    await q.query('DROP FUNCTION plumbline_score_version_guard');
  }
}
