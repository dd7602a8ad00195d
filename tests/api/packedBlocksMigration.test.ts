// The PackedBlocks migration re-encodes blocks stored in the earlier layout (one array element per value) without
// changing a value, and the upload's encoder and the run loader agree on the new layout. Runs the migrations on a
// scratch database of the same PostgreSQL server.
import 'reflect-metadata';
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import { DataSource } from 'typeorm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { migrations } from '../../server/src/platform/database/migrations';
import {
  COPY_BLOCKS_SQL,
  encodeBlocks,
  parseStoredBlock,
  SELECT_BLOCKS_SQL,
  type BlockRow,
} from '../../server/src/domain/cohorts/cohortBlocks';

const base = {
  host: process.env.PGHOST ?? '127.0.0.1',
  port: Number(process.env.PGPORT ?? 54329),
  username: process.env.PGUSER ?? 'postgres',
  password: process.env.PGPASSWORD ?? '',
};
const scratch = `${process.env.PGDATABASE ?? 'plumbline'}_packed_${process.pid}`;
const admin = () =>
  new pg.Client({
    host: base.host,
    port: base.port,
    user: base.username,
    password: base.password,
    database: 'postgres',
  });
const source = (list: typeof migrations) =>
  new DataSource({ type: 'postgres', ...base, database: scratch, migrations: list, migrationsTransactionMode: 'each' });

const STORED = '6f1d2c3b-4a5e-4f60-8a7b-9c0d1e2f3a4b';
const STAGED = '7a8b9c0d-1e2f-4a3b-8c4d-5e6f7a8b9c0d';
// Values in the earlier layout, as a stored cohort version of two blocks and a staged (not yet stored) block had them.
const before = [
  {
    id: STORED,
    block: 0,
    lines: [2, 3, 5],
    outcome: [0, 1, 0],
    dates: ['2025-01-01', null, '2025-04-01'],
    num: ['age', 'lab'],
    numValues: [45, 89, 0.1, -1.5, 1e-300, 1.7976931348623157e308],
    cat: ['emergency'],
    catValues: ['yes', 'no', 'yes'],
    sub: ['unit', 'site'],
    subValues: ['Ålesund', null, 'Birch', 'Main', 'Main', null],
  },
  {
    id: STORED,
    block: 1,
    lines: [7],
    outcome: [1],
    dates: [null],
    num: ['age', 'lab'],
    numValues: [120, 3.25],
    cat: [],
    catValues: [],
    sub: ['unit', 'site'],
    subValues: [null, null],
  },
  {
    id: STAGED,
    block: 0,
    lines: [2, 3],
    outcome: [1, 1],
    dates: ['2025-07-01', '2025-07-01'],
    num: ['p'],
    numValues: [0.25, 0.75],
    cat: [],
    catValues: [],
    sub: [],
    subValues: [],
  },
];

let db: pg.Client;

beforeAll(async () => {
  const a = admin();
  await a.connect();
  await a.query(`DROP DATABASE IF EXISTS ${scratch}`);
  await a.query(`CREATE DATABASE ${scratch}`);
  await a.end();
  // The schema as it was just before PackedBlocks (later migrations, e.g. the insert guard, come after it too).
  const upTo = source(
    migrations.slice(
      0,
      migrations.findIndex((m) => m.name === 'PackedBlocks1764700000000'),
    ),
  );
  await upTo.initialize();
  await upTo.runMigrations();
  const [cohort] = await upTo.query(`INSERT INTO cohorts (name) VALUES ('migration test') RETURNING id`);
  await upTo.query(
    `INSERT INTO cohort_versions (id, cohort_id, version, source_filename, source_sha256, source_bytes, row_count, events, mapping)
    VALUES ($1, $2, 1, 'a.csv', repeat('0', 64), 1, 4, 2, '{}')`,
    [STORED, cohort.id],
  );
  for (const b of before) {
    await upTo.query(
      `INSERT INTO cohort_row_blocks (cohort_version_id, block_no, row_count, dated_count, line_no, outcome, event_date, num_names, num_values, cat_names, cat_values, sub_names, sub_values)
      VALUES ($1, $2, $3, $4, $5, $6, $7::date[], $8, $9, $10, $11, $12, $13)`,
      [
        b.id,
        b.block,
        b.lines.length,
        b.dates.filter((d) => d !== null).length,
        b.lines,
        b.outcome,
        b.dates,
        b.num,
        b.numValues,
        b.cat,
        b.catValues,
        b.sub,
        b.subValues,
      ],
    );
  }
  await upTo.destroy();
  const all = source(migrations);
  await all.initialize();
  await all.runMigrations();
  await all.destroy();
  db = new pg.Client({
    host: base.host,
    port: base.port,
    user: base.username,
    password: base.password,
    database: scratch,
  });
  await db.connect();
}, 120_000);

afterAll(async () => {
  await db?.end();
  const a = admin();
  await a.connect();
  await a.query(`DROP DATABASE IF EXISTS ${scratch}`);
  await a.end();
});

const load = async (id: string) => (await db.query(SELECT_BLOCKS_SQL, [id])).rows.map(parseStoredBlock);

describe('PackedBlocks migration', () => {
  it('gives back every value of stored and staged blocks', async () => {
    for (const id of [STORED, STAGED]) {
      const blocks = await load(id);
      const expected = before.filter((b) => b.id === id);
      expect(blocks).toHaveLength(expected.length);
      blocks.forEach((got, k) => {
        const b = expected[k];
        expect(got.line_no).toEqual(b.lines);
        expect(got.outcome).toEqual(b.outcome);
        expect(got.event_date).toEqual(b.dates);
        expect(got.num_names).toEqual(b.num);
        expect(got.num_values.length).toBe(b.numValues.length);
        got.num_values.forEach((v, i) => expect(Object.is(v, b.numValues[i]), `${v} vs ${b.numValues[i]}`).toBe(true));
        expect(got.cat_values).toEqual(b.catValues);
        expect(got.sub_names).toEqual(b.sub);
        expect(got.sub_values).toEqual(b.subValues);
      });
    }
  });

  it('leaves the blocks of a stored version immutable and checks the packed lengths', async () => {
    await expect(
      db.query('UPDATE cohort_row_blocks SET dated_count = 0 WHERE cohort_version_id = $1', [STORED]),
    ).rejects.toThrow(/immutable/);
    // Nor can a block be added to it (BlockInsertGuard1764700200000); a well-formed block, so only the guard can refuse it.
    await expect(
      db.query(
        `INSERT INTO cohort_row_blocks (cohort_version_id, block_no, row_count, dated_count, line_no, outcome, event_date, num_names, num_values, cat_names, sub_names, cat_codes, sub_codes, text_levels)
      VALUES ($1, 99, 1, 0, '{2}', '{0}', '{NULL}', '{age}', float8send(50), '{}', '{}', '', '', '{}')`,
        [STORED],
      ),
    ).rejects.toThrow(/INSERT on cohort_row_blocks is not allowed/);
    await expect(
      db.query(`INSERT INTO cohort_row_blocks (cohort_version_id, block_no, row_count, dated_count, line_no, outcome, event_date, num_names, num_values, cat_names, sub_names, cat_codes, sub_codes, text_levels)
      VALUES (gen_random_uuid(), 0, 1, 0, '{2}', '{0}', '{NULL}', '{age}', '\\x00'::bytea, '{}', '{}', '', '', '{}')`),
    ).rejects.toThrow(/cohort_row_blocks_num_length/);
  });

  it('reads back what the upload encoder writes (PostgreSQL reads our float8 bytes as float8send writes them)', async () => {
    const id = 'a1b2c3d4-e5f6-4a7b-8c9d-0e1f2a3b4c5d';
    const rows: BlockRow[] = Array.from({ length: 25_000 }, (_, i) => ({
      line: i + 2,
      outcome: (i % 3 === 0 ? 1 : 0) as 0 | 1,
      date: i % 4 ? '2025-03-01' : null,
      num: [i / 7, -i],
      cat: [i % 2 ? 'yes' : 'no'],
      sub: [i % 5 ? `unit ${i % 11}` : null],
    }));
    const client = db as unknown as { query: (q: unknown) => NodeJS.WritableStream };
    await pipeline(
      Readable.from([encodeBlocks(id, { num: ['a', 'b'], cat: ['c'], sub: ['s'] }, rows)]),
      client.query(copyFrom(COPY_BLOCKS_SQL)),
    );
    const blocks = await load(id);
    expect(blocks.map((b) => b.row_count)).toEqual([10_000, 10_000, 5_000]);
    const flat = blocks.flatMap((b) =>
      b.line_no.map((line, i) => ({
        line,
        a: b.num_values[i],
        b: b.num_values[b.row_count + i],
        c: b.cat_values[i],
        s: b.sub_values[i],
      })),
    );
    expect(flat).toEqual(rows.map((r) => ({ line: r.line, a: r.num[0], b: r.num[1], c: r.cat[0], s: r.sub[0] })));
    // PostgreSQL's own reading of the packed bytes: the first block's first values through the float8 bit pattern.
    const {
      rows: [pgRead],
    } = await db.query(
      `SELECT ('x' || encode(substring(num_values FROM 9 FOR 8), 'hex'))::bit(64)::bigint = ('x' || encode(float8send(1.0 / 7), 'hex'))::bit(64)::bigint AS same
      FROM cohort_row_blocks WHERE cohort_version_id = $1 AND block_no = 0`,
      [id],
    );
    expect(pgRead.same).toBe(true);
  });
});
