import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import type { PoolClient } from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import type { MigrationInterface, QueryRunner } from 'typeorm';
import { BLOCK_ROWS, COPY_BLOCKS_SQL, encodeBlocks, type BlockRow } from '../services/cohortBlocks';

/**
 * Cohort rows are stored by column, in blocks of up to 10,000 patients (server/src/services/cohortBlocks.ts), instead
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
        row_count integer NOT NULL CHECK (row_count BETWEEN 1 AND ${BLOCK_ROWS}),
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

    const versions: { id: string }[] = await q.query('SELECT DISTINCT cohort_version_id AS id FROM cohort_rows');
    for (const { id } of versions) {
      const rows: { line_no: number; outcome: number; event_date: string | null; predictors: Record<string, number | string>; subgroups: Record<string, string> }[] =
        await q.query(`SELECT line_no, outcome, event_date::text AS event_date, predictors, subgroups FROM cohort_rows WHERE cohort_version_id = $1 ORDER BY line_no`, [id]);
      const first = rows[0].predictors;
      const num = Object.keys(first).filter((k) => typeof first[k] === 'number');
      const cat = Object.keys(first).filter((k) => typeof first[k] !== 'number');
      const sub = [...new Set(rows.flatMap((r) => Object.keys(r.subgroups)))];
      const blocks: BlockRow[] = rows.map((r) => ({
        line: r.line_no, outcome: r.outcome as 0 | 1, date: r.event_date,
        num: num.map((k) => Number(r.predictors[k])), cat: cat.map((k) => String(r.predictors[k])), sub: sub.map((k) => r.subgroups[k] ?? null),
      }));
      const text = encodeBlocks(id, { num, cat, sub }, blocks);
      const client = (q as unknown as { databaseConnection: PoolClient }).databaseConnection;
      await pipeline(Readable.from([text]), client.query(copyFrom(COPY_BLOCKS_SQL)));
    }
    await q.query('DROP TABLE cohort_rows');
    await q.query('DROP FUNCTION plumbline_guard_cohort_row');
  }

  async down(): Promise<void> {
    throw new Error('RowBlocks cannot be undone automatically: restore the backup taken before the upgrade (npm run restore)');
  }
}
