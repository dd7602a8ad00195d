import type { MigrationInterface, QueryRunner } from 'typeorm';

/**
 * The numeric predictors of a block become one bytea (float8send of each value, column after column) and the text
 * values become codes into a per-block list of levels (int4send of each position, -1 for a missing subgroup):
 * PostgreSQL's array input handles every element on its own, and with one element per value it spent more time
 * storing an upload than its own \copy of the whole CSV file (server/src/domain/cohorts/cohortBlocks.ts has the layout).
 * Stored blocks are re-encoded in place, with their immutability trigger off for this statement only; the values do
 * not change: the migration checks that every block decodes to the arrays it had before it drops them.
 */
export class PackedBlocks1764700000000 implements MigrationInterface {
  name = 'PackedBlocks1764700000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(
      `ALTER TABLE cohort_row_blocks ADD COLUMN packed_num bytea, ADD COLUMN text_levels text[], ADD COLUMN cat_codes bytea, ADD COLUMN sub_codes bytea`,
    );
    for (const c of ['packed_num', 'cat_codes', 'sub_codes'])
      await q.query(`ALTER TABLE cohort_row_blocks ALTER COLUMN ${c} SET COMPRESSION lz4`);
    await q.query('ALTER TABLE cohort_row_blocks DISABLE TRIGGER cohort_row_blocks_immutable');
    await q.query(`
      UPDATE cohort_row_blocks SET
        packed_num = coalesce((SELECT string_agg(float8send(v), ''::bytea ORDER BY o) FROM unnest(num_values) WITH ORDINALITY u(v, o)), ''::bytea),
        text_levels = coalesce((SELECT array_agg(v ORDER BY first) FROM (SELECT v, min(o) AS first FROM unnest(cat_values || sub_values) WITH ORDINALITY u(v, o)
                                 WHERE v IS NOT NULL GROUP BY v) l), '{}')`);
    const code = (
      col: string,
    ) => `coalesce((SELECT string_agg(int4send(coalesce(l.o::int - 1, -1)), ''::bytea ORDER BY u.o)
        FROM unnest(${col}) WITH ORDINALITY u(v, o) LEFT JOIN unnest(text_levels) WITH ORDINALITY l(v, o) ON l.v = u.v), ''::bytea)`;
    await q.query(`UPDATE cohort_row_blocks SET cat_codes = ${code('cat_values')}, sub_codes = ${code('sub_values')}`);
    // Every block must decode to the arrays it had (a decoder of this layout written out here, block by block).
    let after: [string, number] = ['00000000-0000-0000-0000-000000000000', -1];
    for (;;) {
      const blocks: {
        id: string;
        block_no: number;
        num_values: string;
        cat_values: string;
        sub_values: string;
        packed_num: Buffer;
        text_levels: string[];
        cat_codes: Buffer;
        sub_codes: Buffer;
      }[] = await q.query(
        `SELECT cohort_version_id AS id, block_no, array_to_json(num_values)::text AS num_values, array_to_json(cat_values)::text AS cat_values,
           array_to_json(sub_values)::text AS sub_values, packed_num, text_levels, cat_codes, sub_codes
         FROM cohort_row_blocks WHERE (cohort_version_id, block_no) > ($1::uuid, $2) ORDER BY cohort_version_id, block_no LIMIT 20`,
        after,
      );
      if (!blocks.length) break;
      for (const b of blocks) {
        const numbers = JSON.parse(b.num_values) as number[];
        const unpacked = Array.from({ length: b.packed_num.length / 8 }, (_, i) => b.packed_num.readDoubleBE(8 * i));
        const text = (codes: Buffer) =>
          Array.from({ length: codes.length / 4 }, (_, i) => {
            const c = codes.readInt32BE(4 * i);
            return c < 0 ? null : b.text_levels[c];
          });
        const equal = (a: unknown[], c: unknown[]) => a.length === c.length && a.every((v, i) => v === c[i]);
        const same =
          equal(unpacked, numbers) &&
          equal(text(b.cat_codes), JSON.parse(b.cat_values)) &&
          equal(text(b.sub_codes), JSON.parse(b.sub_values));
        if (!same)
          throw new Error(
            `PackedBlocks: block ${b.block_no} of cohort version ${b.id} did not decode to its stored values; nothing was changed`,
          );
      }
      after = [blocks[blocks.length - 1].id, blocks[blocks.length - 1].block_no];
    }
    await q.query('ALTER TABLE cohort_row_blocks ENABLE TRIGGER cohort_row_blocks_immutable');
    await q.query(
      `ALTER TABLE cohort_row_blocks DROP COLUMN num_values, DROP COLUMN cat_values, DROP COLUMN sub_values`,
    );
    await q.query('ALTER TABLE cohort_row_blocks RENAME COLUMN packed_num TO num_values');
    await q.query(`ALTER TABLE cohort_row_blocks
      ALTER COLUMN num_values SET NOT NULL, ALTER COLUMN text_levels SET NOT NULL, ALTER COLUMN cat_codes SET NOT NULL, ALTER COLUMN sub_codes SET NOT NULL,
      ADD CONSTRAINT cohort_row_blocks_num_length CHECK (octet_length(num_values) = 8 * row_count * cardinality(num_names)),
      ADD CONSTRAINT cohort_row_blocks_cat_length CHECK (octet_length(cat_codes) = 4 * row_count * cardinality(cat_names)),
      ADD CONSTRAINT cohort_row_blocks_sub_length CHECK (octet_length(sub_codes) = 4 * row_count * cardinality(sub_names))`);
  }

  async down(): Promise<void> {
    throw new Error(
      'PackedBlocks cannot be undone automatically: restore the backup taken before the upgrade (npm run restore)',
    );
  }
}
