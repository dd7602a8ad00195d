// Missing values counted by the upload check: per column, per subgroup level, per period, and the predictors missing
// together, against a count made by hand on a small table; then the same counts from a file read by the row checks,
// where an empty cell is a gap only in a predictor the steward allowed gaps for.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { MissingnessCounter } from '../../../server/src/domain/cohorts/missingness';
import { checkUploadRows, type CheckInput } from '../../../server/src/domain/cohorts/uploadCheck';

/**
 * The hand-counted table (· a gap). Predictors a, b, c; subgroup unit; period; outcome y.
 *   row  a  b  c  unit  period   y
 *   1    ·  .  .  X     2025-Q1  1
 *   2    ·  ·  .  X     2025-Q1  0
 *   3    .  .  .  Y     2025-Q1  0
 *   4    .  .  .  —     2025-Q2  1
 *   5    ·  .  ·  Y     2025-Q2  1
 *   6    ·  .  .  X     2025-Q2  0
 *   7    .  .  .  Y     —        0
 *   8    ·  ·  .  Y     2025-Q1  1
 */
const TABLE: [gaps: string, unit: string | null, period: string | null, y: number][] = [
  ['a', 'X', '2025-Q1', 1],
  ['ab', 'X', '2025-Q1', 0],
  ['', 'Y', '2025-Q1', 0],
  ['', null, '2025-Q2', 1],
  ['ac', 'Y', '2025-Q2', 1],
  ['a', 'X', '2025-Q2', 0],
  ['', 'Y', null, 0],
  ['ab', 'Y', '2025-Q1', 1],
];

describe('the missingness counter, against a hand count', () => {
  const counter = new MissingnessCounter({
    predictors: ['a', 'b', 'c'],
    gapsAllowed: ['a', 'b', 'c'],
    subgroups: ['unit'],
    period: 'period (period)',
  });
  // Fed in a shuffled order: the summary must not depend on the order of the rows.
  for (const k of [7, 2, 0, 5, 3, 1, 6, 4]) {
    const [gaps, unit, period, y] = TABLE[k];
    counter.add(
      ['a', 'b', 'c'].map((c) => (gaps.includes(c) ? 1 : 0)),
      [unit],
      period,
      y,
    );
  }
  const s = counter.summary();

  it('counts each column: a in rows 1, 2, 5, 6, 8; b in 2, 8; c in 5; unit in 4; period in 7', () => {
    expect(s.rows).toBe(8);
    expect(s.events).toBe(4);
    expect(s.byColumn).toEqual([
      { column: 'a', role: 'predictor', missing: 5 },
      { column: 'b', role: 'predictor', missing: 2 },
      { column: 'c', role: 'predictor', missing: 1 },
      { column: 'unit', role: 'subgroup', missing: 1 },
      { column: 'period (period)', role: 'period', missing: 1 },
    ]);
    // Rows with a predictor missing: 1, 2, 5, 6, 8; of them 1, 5 and 8 had the event.
    expect(s.rowsWithGaps).toBe(5);
    expect(s.eventsWithGaps).toBe(3);
  });

  it('counts the combinations: none (3 rows), a alone (2), a with b (2), a with c (1), most rows first', () => {
    expect(s.patterns).toEqual([
      { missing: [], rows: 3, events: 1 },
      { missing: ['a'], rows: 2, events: 1 },
      { missing: ['a', 'b'], rows: 2, events: 1 },
      { missing: ['a', 'c'], rows: 1, events: 1 },
    ]);
    expect(s.otherPatterns).toBeNull();
    expect(s.patterns.reduce((n, p) => n + p.rows, 0)).toBe(s.rows);
  });

  it('counts per unit: Y rows 3, 5, 7, 8; X rows 1, 2, 6; not recorded row 4', () => {
    expect(s.bySubgroup).toEqual([
      {
        subgroup: 'unit',
        levels: [
          { level: 'Y', rows: 4, events: 2, rowsWithGaps: 2, missing: [2, 1, 1] },
          { level: 'X', rows: 3, events: 1, rowsWithGaps: 3, missing: [3, 1, 0] },
          { level: null, rows: 1, events: 1, rowsWithGaps: 0, missing: [0, 0, 0] },
        ],
        otherLevels: 0,
      },
    ]);
  });

  it('counts per period in time order, rows without a period last: Q1 rows 1, 2, 3, 8; Q2 rows 4, 5, 6', () => {
    expect(s.byPeriod).toEqual([
      { level: '2025-Q1', rows: 4, events: 2, rowsWithGaps: 3, missing: [3, 2, 0] },
      { level: '2025-Q2', rows: 3, events: 2, rowsWithGaps: 2, missing: [2, 0, 1] },
      { level: null, rows: 1, events: 0, rowsWithGaps: 0, missing: [0, 0, 0] },
    ]);
  });

  it('without a period column has no period view, and lists at most 50 combinations with the rest summed', () => {
    const many = new MissingnessCounter({
      predictors: Array.from({ length: 8 }, (_, k) => `p${k}`),
      gapsAllowed: [],
      subgroups: [],
      period: null,
    });
    // Every one of the 256 combinations once, and the empty one 10 times more.
    for (let mask = 0; mask < 256; mask++)
      many.add(
        Array.from({ length: 8 }, (_, k) => (mask >> k) & 1),
        [],
        null,
        mask % 2,
      );
    for (let i = 0; i < 10; i++) many.add(new Array(8).fill(0), [], null, 0);
    const m = many.summary();
    expect(m.byPeriod).toBeNull();
    expect(m.patterns).toHaveLength(50);
    expect(m.patterns[0]).toEqual({ missing: [], rows: 11, events: 0 });
    expect(m.otherPatterns).toEqual({
      patterns: 206,
      rows: 206,
      events: 128 - m.patterns.filter((p) => p.events).length,
    });
    expect(m.patterns.reduce((n, p) => n + p.rows, 0) + m.otherPatterns!.rows).toBe(266);
  });
});

const dir = mkdtempSync(path.join(tmpdir(), 'plumbline-gaps-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('the row checks with gaps allowed', () => {
  const HEADER = ['age', 'lab', 'flag', 'died', 'period', 'unit'];
  const predictors: CheckInput['predictors'] = [
    { column: 'age', kind: 'numeric', positiveOnly: false },
    { column: 'lab', kind: 'numeric', positiveOnly: true },
    { column: 'flag', kind: 'text', positiveOnly: false },
  ];
  const mapping = {
    predictors: { age: 'age', lab: 'lab', flag: 'flag' },
    outcome: { column: 'died', positive: ['yes'], negative: ['no'] },
    date: { column: 'period' },
    subgroups: { unit: 'unit' },
    ranges: {},
  };
  const FILE = [
    HEADER.join(','),
    '50,1.5,yes,no,2025-Q1,North', // complete
    '61,,yes,yes,2025-Q1,North', // lab missing
    '70, ,,no,2025-Q2,South', // lab (blank) and flag missing
    ',2.0,no,no,2025-Q2,South', // age missing: never allowed here
    '44,,no,yes,2025-Q2,', // lab missing, no unit
    '52,0.8,no,,2025-Q2,North', // no outcome: never a gap
  ].join('\n');

  async function check(gaps: string[]) {
    const file = path.join(dir, `g${Math.random().toString(36).slice(2)}.csv`);
    writeFileSync(file, `${FILE}\n`);
    return checkUploadRows(
      {
        path: file,
        delimiter: ',',
        headers: HEADER,
        mapping: { ...mapping, predictorsWithGaps: gaps },
        predictors,
        supplied: false,
        plannedVersionId: '0b7c5d0e-1f2a-4b3c-8d4e-5f6a7b8c9d0e',
        totalBytes: FILE.length,
      },
      { rows: () => {}, progress: () => {} },
    );
  }

  it('keeps the gaps as missing values, and still rejects an empty age and an empty outcome', async () => {
    const r = await check(['lab', 'flag']);
    expect(r.refusal).toBeNull();
    expect(r.accepted).toBe(4);
    expect(r.rejections.map(([line, column, , reason]) => [line, column, reason])).toEqual([
      [5, 'age', 'missing value for age'],
      [7, 'died', 'missing outcome'],
    ]);
    expect(r.columnSummary.lab).toMatchObject({ kind: 'numeric', n: 1, missing: 3, min: 1.5, max: 1.5 });
    expect(r.columnSummary.flag).toMatchObject({ kind: 'categorical', n: 3, missing: 1 });
    expect(r.columnSummary.age).toMatchObject({ n: 4, missing: 0 });
    expect(r.missingness.gapsAllowed).toEqual(['lab', 'flag']);
    expect(r.missingness.rowsWithGaps).toBe(3);
    expect(r.missingness.eventsWithGaps).toBe(2);
    expect(r.missingness.patterns).toEqual([
      { missing: ['lab'], rows: 2, events: 2 },
      { missing: [], rows: 1, events: 0 },
      { missing: ['lab', 'flag'], rows: 1, events: 0 },
    ]);
    expect(r.missingness.byColumn.find((c) => c.column === 'unit')).toEqual({
      column: 'unit',
      role: 'subgroup',
      missing: 1,
    });
  });

  it('rejects the rows with an empty lab when the steward did not allow gaps there (as before)', async () => {
    const r = await check([]);
    expect(r.accepted).toBe(1);
    expect(r.rejections.filter(([, column]) => column === 'lab').map(([line]) => line)).toEqual([3, 4, 6]);
    expect(r.missingness.rowsWithGaps).toBe(0);
    expect(r.columnSummary.lab).toMatchObject({ missing: 0 });
  });
});
