import type { MigrationInterface, QueryRunner } from 'typeorm';

/**
 * Rows are staged by the upload check: the worker thread streams the accepted rows into cohort_rows with COPY, in
 * one transaction, under the id the cohort version will get; storing the upload inserts that cohort_versions row.
 * Rows whose version does not exist (yet) are a checked upload's, invisible to every reader (all reads go through a
 * cohort version) and may be deleted when the upload is re-mapped or discarded. Rows of a stored version stay
 * immutable: UPDATE is always refused, DELETE once the version exists. The prepared COPY file is gone with it.
 */
export class StagedRows1764633950000 implements MigrationInterface {
  name = 'StagedRows1764633950000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE FUNCTION plumbline_guard_cohort_row() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP = 'DELETE' AND NOT EXISTS (SELECT 1 FROM cohort_versions WHERE id = OLD.cohort_version_id) THEN
          RETURN OLD;
        END IF;
        RAISE EXCEPTION 'plumbline: % on % is not allowed (rows of a stored cohort version are immutable)', TG_OP, TG_TABLE_NAME
          USING ERRCODE = 'P0001';
      END $$`);
    await q.query('DROP TRIGGER cohort_rows_immutable ON cohort_rows');
    await q.query(`
      CREATE TRIGGER cohort_rows_immutable BEFORE UPDATE OR DELETE ON cohort_rows
      FOR EACH ROW EXECUTE FUNCTION plumbline_guard_cohort_row()`);
    await q.query('ALTER TABLE cohort_uploads DROP COLUMN prepared_path');
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('ALTER TABLE cohort_uploads ADD COLUMN prepared_path text');
    await q.query('DROP TRIGGER cohort_rows_immutable ON cohort_rows');
    await q.query(`
      CREATE TRIGGER cohort_rows_immutable BEFORE UPDATE OR DELETE ON cohort_rows
      FOR EACH ROW EXECUTE FUNCTION plumbline_refuse_change()`);
    await q.query('DROP FUNCTION plumbline_guard_cohort_row');
  }
}
