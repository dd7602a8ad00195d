// Gaps in predictors: where the steward says a predictor may have gaps, an empty cell is stored as a missing value (not
// a rejected row), the version counts them per column, subgroup, period and combination, and a run leaves those rows
// out and says how many. Without that permission the same file is rejected row by row, as before; the outcome and
// the period never have gaps; the identifier screen still reads every non-empty cell of a column with gaps.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runSettingsSchema } from '@shared/runs';
import type { MissingnessSummary } from '@shared/missingness';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { KESTREL_HEADER, kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { loadCohortData } from '../../server/src/domain/cohorts/cohortData';
import { whenProcessed } from '../../server/src/domain/cohorts/uploads';
import { recordRunNow } from '../../server/src/domain/runs/runQueue';
import { app, bearer, dataSource, tokenFor, useDatabase } from '../helpers/api';
import { createScoreFixture, type ScoreFixture } from '../helpers/fixtures';

useDatabase();

const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-gaps-test-'));
const run = `${Date.now()}`;
let score: ScoreFixture;
afterAll(() => rmSync(tmp, { recursive: true, force: true }));
beforeAll(async () => {
  score = await createScoreFixture({ name: `Gaps score ${run}` });
});

const CHARLSON = KESTREL_HEADER.indexOf('charlson_index');
const EMERGENCY = KESTREL_HEADER.indexOf('emergency_admission');
const UNIT = KESTREL_HEADER.indexOf('unit');

/** An invented quarter with Charlson blank on every 7th row and emergency blank on every 11th (line = index + 2). */
function gappyLines(n: number, seed = 5): string[] {
  const lines = [...kestrelQuarterCsv({ year: 2025, quarter: 2, index: 5, n, seed })];
  for (let i = 1; i < lines.length; i++) {
    const cells = lines[i].split(',');
    if (i % 7 === 0) cells[CHARLSON] = '';
    if (i % 11 === 0) cells[EMERGENCY] = '';
    lines[i] = cells.join(',');
  }
  return lines;
}
function writeCsv(name: string, lines: string[]): string {
  const file = path.join(tmp, name);
  writeFileSync(file, `${lines.join('\n')}\n`);
  return file;
}
async function upload(file: string, cohortName: string, scoreVersionId = score.scoreVersionId) {
  const res = await request(app)
    .post('/api/cohorts')
    .set(bearer(await tokenFor('steward')))
    .field('scoreVersionId', scoreVersionId)
    .field('cohortName', cohortName)
    .attach('file', file);
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  return res.body.upload.id as string;
}
async function postMapping(id: string, mapping: object) {
  return request(app)
    .post(`/api/uploads/${id}/mapping`)
    .set(bearer(await tokenFor('steward')))
    .send({ mapping });
}
async function mapAndWait(id: string, mapping: object) {
  const res = await postMapping(id, mapping);
  expect(res.status, JSON.stringify(res.body)).toBe(202);
  await whenProcessed(id);
  return (
    await request(app)
      .get(`/api/uploads/${id}`)
      .set(bearer(await tokenFor('steward')))
  ).body.upload;
}

/** What the file holds, counted from its text (the test's own count, not the server's). */
function countGaps(lines: string[]) {
  const rows = lines.slice(1).map((l) => l.split(','));
  const blank = (c: number) => rows.filter((r) => r[c] === '').length;
  const both = rows.filter((r) => r[CHARLSON] === '' && r[EMERGENCY] === '').length;
  const any = rows.filter((r) => r[CHARLSON] === '' || r[EMERGENCY] === '');
  return {
    charlson: blank(CHARLSON),
    emergency: blank(EMERGENCY),
    both,
    anyRows: any.length,
    anyEvents: any.filter((r) => r[KESTREL_HEADER.indexOf('readmitted_30d')] === 'yes').length,
    birchCharlson: rows.filter((r) => r[UNIT] === 'Birch' && r[CHARLSON] === '').length,
  };
}

describe('a predictor the steward allows gaps in', () => {
  const lines = gappyLines(400);
  const expected = countGaps(lines);
  let versionId = '';
  let cohortId = '';

  it('keeps empty cells as missing values, not rejected rows, and counts them', async () => {
    // Rows 7, 14, … and 11, 22, …: 57 and 36 blanks, 5 rows with both (77, 154, …).
    expect(expected).toMatchObject({ charlson: 57, emergency: 36, both: 5, anyRows: 88 });
    const id = await upload(writeCsv('gaps.csv', lines), `Gaps allowed ${run}`);
    const u = await mapAndWait(id, {
      ...KESTREL_MAPPING,
      predictorsWithGaps: ['charlson_index', 'emergency_admission'],
    });
    expect(u.status).toBe('checked');
    expect(u.rowsRejected).toBe(0);
    expect(u.rowsAccepted).toBe(400);
    expect(u.columnSummary.charlson_index.missing).toBe(expected.charlson);
    expect(u.columnSummary.emergency_admission.missing).toBe(expected.emergency);
    expect(u.columnSummary.age.missing).toBe(0);
    const m: MissingnessSummary = u.missingness;
    expect(m.rowsWithGaps).toBe(expected.anyRows);
    expect(m.eventsWithGaps).toBe(expected.anyEvents);

    const stored = await request(app)
      .post(`/api/uploads/${id}/commit`)
      .set(bearer(await tokenFor('steward')))
      .send({});
    expect(stored.status, JSON.stringify(stored.body)).toBe(201);
    versionId = stored.body.cohortVersionId;
    cohortId = stored.body.cohortId;
  });

  it("the version's page data says per column, unit, period and combination how many are missing", async () => {
    const res = await request(app)
      .get(`/api/cohorts/${cohortId}/versions/1`)
      .set(bearer(await tokenFor('statistician')));
    expect(res.status).toBe(200);
    const v = res.body.version;
    expect(v.mapping.predictorsWithGaps).toEqual(['charlson_index', 'emergency_admission']);
    expect(v.columnSummary.charlson_index.missing).toBe(expected.charlson);
    const m: MissingnessSummary = v.missingness;
    expect(m.byColumn.filter((c) => c.role === 'predictor')).toEqual([
      { column: 'age', role: 'predictor', missing: 0 },
      { column: 'length_of_stay', role: 'predictor', missing: 0 },
      { column: 'prior_admissions', role: 'predictor', missing: 0 },
      { column: 'emergency_admission', role: 'predictor', missing: expected.emergency },
      { column: 'charlson_index', role: 'predictor', missing: expected.charlson },
    ]);
    const pattern = (cols: string[]) => m.patterns.find((p) => p.missing.join() === cols.join())?.rows;
    expect(pattern([])).toBe(400 - expected.anyRows);
    expect(pattern(['charlson_index'])).toBe(expected.charlson - expected.both);
    expect(pattern(['emergency_admission'])).toBe(expected.emergency - expected.both);
    expect(pattern(['emergency_admission', 'charlson_index'])).toBe(expected.both);
    const charlsonAt = m.predictors.indexOf('charlson_index');
    const birch = m.bySubgroup.find((s) => s.subgroup === 'unit')!.levels.find((l) => l.level === 'Birch')!;
    expect(birch.missing[charlsonAt]).toBe(expected.birchCharlson);
    // Every row falls in one period of the quarter (months), and the months add up to the whole.
    expect(m.byPeriod!.map((p) => p.level)).toEqual(['2025-04', '2025-05', '2025-06']);
    expect(m.byPeriod!.reduce((s, p) => s + p.missing[charlsonAt], 0)).toBe(expected.charlson);
  });

  it('reads back as null from the stored blocks, at the lines that were blank', async () => {
    const data = await loadCohortData(versionId);
    const blankLines = (c: number) =>
      lines
        .slice(1)
        .map((l, i) => [l.split(',')[c], i + 2] as const)
        .filter(([cell]) => cell === '')
        .map(([, line]) => line);
    const nullLines = (name: string) => Array.from(data.lineNo).filter((_, i) => data.columns[name][i] === null);
    expect(nullLines('charlson_index')).toEqual(blankLines(CHARLSON));
    expect(nullLines('emergency_admission')).toEqual(blankLines(EMERGENCY));
    expect(nullLines('age')).toEqual([]);
    // A recorded value is stored as it was written.
    const at = Array.from(data.lineNo).indexOf(3);
    expect(String(data.columns.charlson_index[at])).toBe(lines[2].split(',')[CHARLSON]);
  });

  it('a run without imputation analyses the complete cases and says how many rows it left out', async () => {
    const runId = await recordRunNow(
      null,
      score.scoreVersionId,
      versionId,
      runSettingsSchema.parse({ subgroupColumns: ['unit'] }),
    );
    const [r] = await dataSource.query('SELECT status, results FROM validation_runs WHERE id = $1', [runId]);
    expect(r.status).toBe('completed');
    expect(r.results.overall.n).toBe(400 - expected.anyRows);
    // The run's missing-data part counts the complete cases' left-out patients and the gaps per column.
    const leftOut = {
      count: r.results.missingData?.completeCase?.leftOut,
      byColumn: r.results.missingData?.gapsByColumn,
    };
    expect(leftOut.count).toBe(expected.anyRows);
    expect(leftOut.byColumn.emergency_admission).toBe(expected.emergency);
    expect(leftOut.byColumn.charlson_index).toBe(expected.charlson);
    const units = r.results.subgroups.filter((s: { column: string }) => s.column === 'unit');
    expect(units.reduce((s: number, g: { n: number }) => s + g.n, 0)).toBe(400 - expected.anyRows);
  });
});

describe('without the permission, or where it cannot be given', () => {
  it('the same file has its rows with blanks rejected, as before', async () => {
    const lines = gappyLines(400);
    const id = await upload(writeCsv('nogaps.csv', lines), `Gaps not allowed ${run}`);
    const u = await mapAndWait(id, KESTREL_MAPPING);
    expect(u.rowsRejected).toBe(countGaps(lines).anyRows);
    expect(u.rowsAccepted).toBe(400 - countGaps(lines).anyRows);
    expect(u.rejectionCounts).toEqual(
      expect.arrayContaining([
        { reason: 'missing charlson_index', count: 57 },
        { reason: 'missing emergency_admission', count: 36 },
      ]),
    );
    expect(u.missingness.rowsWithGaps).toBe(0);
  });

  it('is refused (400) for the outcome, the period, a column the mapping does not have, or a supplied probability', async () => {
    const id = await upload(writeCsv('refuse.csv', gappyLines(50)), `Gaps refused ${run}`);
    const cases: [object, RegExp][] = [
      [{ ...KESTREL_MAPPING, predictorsWithGaps: ['readmitted_30d'] }, /only predictors may have gaps/],
      [{ ...KESTREL_MAPPING, predictorsWithGaps: ['outcome'] }, /only predictors may have gaps/],
      [
        {
          ...KESTREL_MAPPING,
          predictors: { ...KESTREL_MAPPING.predictors, charlson_index: 'readmitted_30d' },
          predictorsWithGaps: ['charlson_index'],
        },
        /outcome never has gaps/,
      ],
      [
        {
          ...KESTREL_MAPPING,
          predictors: { ...KESTREL_MAPPING.predictors, charlson_index: 'discharge_date' },
          predictorsWithGaps: ['charlson_index'],
        },
        /period never has gaps/,
      ],
    ];
    for (const [mapping, message] of cases) {
      const res = await postMapping(id, mapping);
      expect(res.status, JSON.stringify(res.body)).toBe(400);
      expect(JSON.stringify(res.body)).toMatch(message);
    }
    const supplied = await createScoreFixture({ mode: 'supplied', probabilityColumn: 'risk', name: `Supplied ${run}` });
    const file = writeCsv('supplied.csv', ['risk,readmitted_30d', '0.2,yes', ',no', '0.1,no']);
    const sid = await upload(file, `Supplied gaps ${run}`, supplied.scoreVersionId);
    const res = await postMapping(sid, {
      predictors: { risk: 'risk' },
      outcome: { column: 'readmitted_30d', positive: ['yes'], negative: ['no'] },
      predictorsWithGaps: ['risk'],
    });
    expect(res.status, JSON.stringify(res.body)).toBe(400);
    expect(res.body.error).toMatch(/supplied probability column "risk" cannot have gaps/);
  });
});

describe('the identifier screen in a column with gaps', () => {
  const cases: [string, string, RegExp][] = [
    ['a 10-digit phone number', '5552014477', /telephone|identifying|record/],
    ['a person name', 'Tamsin Okoro', /name/],
  ];
  it.each(cases)('refuses the upload on %s after row 5,000, and keeps nothing of it', async (_what, value, reason) => {
    const lines = gappyLines(5300, 9);
    const cells = lines[5200].split(',');
    cells[CHARLSON] = value;
    lines[5200] = cells.join(',');
    const id = await upload(writeCsv('late-id.csv', lines), `Gaps identifier ${run} ${value.length}`);
    const u = await mapAndWait(id, { ...KESTREL_MAPPING, predictorsWithGaps: ['charlson_index'] });
    expect(u.status).toBe('refused');
    expect(u.error).toMatch(reason);
    expect(u.missingness).toBeNull();
    const [staged] = await dataSource.query(
      `SELECT count(*)::int AS n FROM cohort_row_blocks b JOIN cohort_uploads u ON u.planned_version_id = b.cohort_version_id WHERE u.id = $1`,
      [id],
    );
    expect(staged.n).toBe(0);
  });
});
