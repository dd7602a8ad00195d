import type { MigrationInterface, QueryRunner } from 'typeorm';

/**
 * Cohort rows are stored by column, in blocks of up to 10,000 patients (server/src/domain/cohorts/cohortBlocks.ts), instead
 * of one tuple with two JSON documents per patient: the per-patient layout made storing a million-row upload several
 * times slower than PostgreSQL's own \copy of the same file, and runs read every row of a version anyway. Rows stored
 * before are moved into blocks here. The guard is the one staged rows had: a block of a stored version never changes;
 * a block whose version does not exist yet belongs to a checked upload and may be deleted.
 */
export class RowBlocks1764634000000 implements MigrationInterface {
  name = 'RowBlocks1764634000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE cohort_row_blocks (
        cohort_version_id uuid NOT NULL,
        block_no integer NOT NULL CHECK (block_no >= 0),
        row_count integer NOT NULL CHECK (row_count BETWEEN 1 AND 10000),
        dated_count integer NOT NULL CHECK (dated_count BETWEEN 0 AND row_count),
        line_no integer[] NOT NULL CHECK (cardinality(line_no) = row_count),
        outcome smallint[] NOT NULL CHECK (cardinality(outcome) = row_count AND outcome <@ ARRAY[0, 1]::smallint[]),
        event_date date[] NOT NULL CHECK (cardinality(event_date) = row_count),
        num_names text[] NOT NULL,
        num_values float8[] NOT NULL CHECK (cardinality(num_values) = row_count * cardinality(num_names)),
        cat_names text[] NOT NULL,
        cat_values text[] NOT NULL CHECK (cardinality(cat_values) = row_count * cardinality(cat_names)),
        sub_names text[] NOT NULL,
        sub_values text[] NOT NULL CHECK (cardinality(sub_values) = row_count * cardinality(sub_names)),
        PRIMARY KEY (cohort_version_id, block_no)
      )`);
    // Large arrays are kept out of line; lz4 is much cheaper than the default pglz for a write-once table.
    for (const c of ['line_no', 'outcome', 'event_date', 'num_values', 'cat_values', 'sub_values']) {
      await q.query(`ALTER TABLE cohort_row_blocks ALTER COLUMN ${c} SET COMPRESSION lz4`);
    }
    await q.query(`
      CREATE FUNCTION plumbline_guard_cohort_block() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP = 'DELETE' AND NOT EXISTS (SELECT 1 FROM cohort_versions WHERE id = OLD.cohort_version_id) THEN
          RETURN OLD;
        END IF;
        RAISE EXCEPTION 'plumbline: % on % is not allowed (rows of a stored cohort version are immutable)', TG_OP, TG_TABLE_NAME
          USING ERRCODE = 'P0001';
      END $$`);
    await q.query(`
      CREATE TRIGGER cohort_row_blocks_immutable BEFORE UPDATE OR DELETE ON cohort_row_blocks
      FOR EACH ROW EXECUTE FUNCTION plumbline_guard_cohort_block()`);

    // Written out here rather than with the upload's encoder (domain/cohorts/cohortBlocks.ts), which has moved on to a later
    // layout (PackedBlocks1764700000000): this migration must keep producing the layout its own table has.
    const versions: { id: string }[] = await q.query('SELECT DISTINCT cohort_version_id AS id FROM cohort_rows');
    for (const { id } of versions) {
      const rows: {
        line_no: number;
        outcome: number;
        event_date: string | null;
        predictors: Record<string, number | string>;
        subgroups: Record<string, string>;
      }[] = await q.query(
        `SELECT line_no, outcome, event_date::text AS event_date, predictors, subgroups FROM cohort_rows WHERE cohort_version_id = $1 ORDER BY line_no`,
        [id],
      );
      const first = rows[0].predictors;
      const num = Object.keys(first).filter((k) => typeof first[k] === 'number');
      const cat = Object.keys(first).filter((k) => typeof first[k] !== 'number');
      const sub = [...new Set(rows.flatMap((r) => Object.keys(r.subgroups)))];
      for (let b = 0; b * 10_000 < rows.length; b++) {
        const part = rows.slice(b * 10_000, (b + 1) * 10_000);
        await q.query(
          `INSERT INTO cohort_row_blocks (cohort_version_id, block_no, row_count, dated_count, line_no, outcome, event_date, num_names, num_values, cat_names, cat_values, sub_names, sub_values)
           VALUES ($1, $2, $3, $4, $5, $6, $7::date[], $8, $9, $10, $11, $12, $13)`,
          [
            id,
            b,
            part.length,
            part.filter((r) => r.event_date !== null).length,
            part.map((r) => r.line_no),
            part.map((r) => r.outcome),
            part.map((r) => r.event_date),
            num,
            num.flatMap((k) => part.map((r) => Number(r.predictors[k]))),
            cat,
            cat.flatMap((k) => part.map((r) => String(r.predictors[k]))),
            sub,
            sub.flatMap((k) => part.map((r) => r.subgroups[k] ?? null)),
          ],
        );
      }
    }
    await q.query('DROP TABLE cohort_rows');
    await q.query('DROP FUNCTION plumbline_guard_cohort_row');
  }

  async down(): Promise<void> {
    throw new Error(
      'RowBlocks cannot be undone automatically: restore the backup taken before the upgrade (npm run restore)',
    );
  }
}
