// Quarter ends: a file whose period column holds 2026-Q1 and 2026-Q2 is a cohort from 2026-01-01 to 2026-06-30, its
// rows show the uploaded 2026-Q2, and the period summary runs forwards in time.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { whenProcessed } from '../../server/src/domain/cohorts/uploads';
import { app, bearer, tokenFor, useDatabase } from '../helpers/api';
import { createScoreFixture, type ScoreFixture } from '../helpers/fixtures';

useDatabase();

const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-periods-test-'));
let score: ScoreFixture;
beforeAll(async () => {
  score = await createScoreFixture();
});
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

/** Invented rows of one quarter with the period column rewritten to `label` (the generator writes months). */
function rowsLabelled(year: number, quarter: 1 | 2 | 3 | 4, n: number, label: string): string[] {
  const lines = [...kestrelQuarterCsv({ year, quarter, index: 0, n, seed: 40 + quarter })].slice(1);
  return lines.map((l) => {
    const c = l.split(',');
    c[6] = label;
    return c.join(',');
  });
}

async function storeFile(
  name: string,
  lines: string[],
): Promise<{ cohortId: string; version: number; cohortVersionId: string; upload: Record<string, unknown> }> {
  const header = [...kestrelQuarterCsv({ year: 2026, quarter: 1, index: 0, n: 0, seed: 1 })][0];
  const file = path.join(tmp, name);
  writeFileSync(file, `${[header, ...lines].join('\n')}\n`);
  const steward = bearer(await tokenFor('steward'));
  const res = await request(app)
    .post('/api/cohorts')
    .set(steward)
    .field('scoreVersionId', score.scoreVersionId)
    .field('cohortName', `Periods ${name} ${Date.now()}`)
    .attach('file', file);
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  const id = res.body.upload.id;
  const mapped = await request(app).post(`/api/uploads/${id}/mapping`).set(steward).send({ mapping: KESTREL_MAPPING });
  expect(mapped.status, JSON.stringify(mapped.body)).toBe(202);
  await whenProcessed(id);
  const upload = (await request(app).get(`/api/uploads/${id}`).set(steward)).body.upload;
  expect(upload.status).toBe('checked');
  const commit = await request(app).post(`/api/uploads/${id}/commit`).set(steward).send({ excludeRejected: false });
  expect(commit.status, JSON.stringify(commit.body)).toBe(201);
  return { ...commit.body, upload };
}

describe('uploaded periods', () => {
  it('2026-Q1 and 2026-Q2: the version ends on 2026-06-30, rows and summary show the quarters, forwards', async () => {
    // Q2 first in the file and more of it: neither file order nor counts may decide the order shown.
    const stored = await storeFile('quarters.csv', [
      ...rowsLabelled(2026, 2, 60, '2026-Q2'),
      ...rowsLabelled(2026, 1, 40, '2026-Q1'),
    ]);
    const steward = bearer(await tokenFor('steward'));
    const v = {
      body: (await request(app).get(`/api/cohorts/${stored.cohortId}/versions/${stored.version}`).set(steward)).body
        .version,
      status: 200,
    };
    expect(v.status).toBe(200);
    expect({ start: v.body.periodStart, end: v.body.periodEnd }).toEqual({ start: '2026-01-01', end: '2026-06-30' });
    const summary = v.body.columnSummary['period (discharge_date)'];
    expect(summary.levels).toEqual([
      { value: '2026-Q1', count: 40 },
      { value: '2026-Q2', count: 60 },
    ]);

    const rows = await request(app)
      .get(`/api/cohorts/${stored.cohortId}/versions/${stored.version}/rows`)
      .set(steward)
      .query({ page: 1, pageSize: 5, sortBy: 'line_no', sortDir: 'asc' });
    expect(rows.status).toBe(200);
    expect(rows.body.rows[0]).toMatchObject({ lineNo: 2, period: '2026-Q2', eventDate: '2026-04-01' });

    // The rows search finds a period by the label the rows show, as well as by its first day.
    const search = (text: string) =>
      request(app)
        .get(`/api/cohorts/${stored.cohortId}/versions/${stored.version}/rows`)
        .set(steward)
        .query({ page: 1, pageSize: 100, search: text });
    const q1 = await search('2026-q1');
    expect(q1.body.total).toBe(40);
    expect(new Set(q1.body.rows.map((r: { period: string }) => r.period))).toEqual(new Set(['2026-Q1']));
    expect((await search('2026-04-01')).body.total).toBe(60);
  });

  it('a file mixing a quarter and months: each row shows the label it was uploaded with, and search finds it', async () => {
    const stored = await storeFile('mixed.csv', [
      ...rowsLabelled(2026, 1, 30, '2026-Q1'),
      ...rowsLabelled(2026, 2, 20, '2026-04'),
      ...rowsLabelled(2026, 2, 10, '2026-05'),
    ]);
    const steward = bearer(await tokenFor('steward'));
    const rowsOf = (query: Record<string, string | number>) =>
      request(app)
        .get(`/api/cohorts/${stored.cohortId}/versions/${stored.version}/rows`)
        .set(steward)
        .query({ page: 1, pageSize: 100, sortBy: 'line_no', sortDir: 'asc', ...query });
    const all = await rowsOf({});
    expect(all.status).toBe(200);
    const shown = all.body.rows.map((r: { period: string }) => r.period);
    expect(shown.slice(0, 30).every((p: string) => p === '2026-Q1')).toBe(true);
    expect(shown.slice(30, 50).every((p: string) => p === '2026-04')).toBe(true);
    expect(shown.slice(50, 60).every((p: string) => p === '2026-05')).toBe(true);
    expect((await rowsOf({ search: '2026-q1' })).body.total).toBe(30);
    expect((await rowsOf({ search: '2026-05' })).body.total).toBe(10);
  });

  it('months across a year end and a leap February: the version ends on the last day of the last month', async () => {
    const stored = await storeFile('months.csv', [
      ...rowsLabelled(2023, 4, 20, '2023-12'),
      ...rowsLabelled(2024, 1, 20, '2024-02'),
    ]);
    const steward = bearer(await tokenFor('steward'));
    const v = {
      body: (await request(app).get(`/api/cohorts/${stored.cohortId}/versions/${stored.version}`).set(steward)).body
        .version,
      status: 200,
    };
    expect({ start: v.body.periodStart, end: v.body.periodEnd }).toEqual({ start: '2023-12-01', end: '2024-02-29' });
    expect(v.body.columnSummary['period (discharge_date)'].levels.map((l: { value: string }) => l.value)).toEqual([
      '2023-12',
      '2024-02',
    ]);
  });

  it('half-years are read, and a half-year file ends on 30 June', async () => {
    const stored = await storeFile('half.csv', rowsLabelled(2026, 1, 30, '2026-H1'));
    const steward = bearer(await tokenFor('steward'));
    const v = {
      body: (await request(app).get(`/api/cohorts/${stored.cohortId}/versions/${stored.version}`).set(steward)).body
        .version,
      status: 200,
    };
    expect({ start: v.body.periodStart, end: v.body.periodEnd }).toEqual({ start: '2026-01-01', end: '2026-06-30' });
    const rows = await request(app)
      .get(`/api/cohorts/${stored.cohortId}/versions/${stored.version}/rows`)
      .set(steward)
      .query({ page: 1, pageSize: 1 });
    expect(rows.body.rows[0].period).toBe('2026-H1');
  });
});
