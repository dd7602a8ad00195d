// A coding mismatch never passes silently: an indicator column whose level never occurs (Y/N against "yes"), or that
// holds labels the formula does not name, stops the upload until the steward maps those labels (stored with the
// cohort version's mapping and applied to the rows) or goes back; a run warns when a level is absent or rare.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CodingIssue, UploadView } from '@shared/cohorts';
import type { RunResults } from '@shared/runs';
import { runSettingsSchema } from '@shared/runs';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { loadCohortData } from '../../server/src/domain/cohorts/cohortData';
import { recordRunNow } from '../../server/src/domain/runs/runQueue';
import { whenProcessed } from '../../server/src/domain/cohorts/uploads';
import { app, bearer, dataSource, tokenFor, useDatabase } from '../helpers/api';
import { createCohortFixture, createScoreFixture, kestrelRows, type ScoreFixture } from '../helpers/fixtures';

useDatabase();

const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-coding-test-'));
let score: ScoreFixture;
beforeAll(async () => {
  score = await createScoreFixture({ name: `Coding fixture ${Date.now()}` });
});
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

/** Invented rows with emergency_admission (column 4) recoded by `code`. */
function fileWith(name: string, code: (v: string, i: number) => string): { file: string; yes: number } {
  const [header, ...rows] = [...kestrelQuarterCsv({ year: 2026, quarter: 1, index: 0, n: 120, seed: 77 })];
  let yes = 0;
  const lines = rows.map((l, i) => {
    const c = l.split(',');
    if (c[3] === 'yes') yes++;
    c[3] = code(c[3], i);
    return c.join(',');
  });
  const file = path.join(tmp, name);
  writeFileSync(file, `${[header, ...lines].join('\n')}\n`);
  return { file, yes };
}

const steward = async () => bearer(await tokenFor('steward'));

async function uploadAndCheck(file: string, mapping: object = KESTREL_MAPPING): Promise<UploadView> {
  const res = await request(app)
    .post('/api/cohorts')
    .set(await steward())
    .field('scoreVersionId', score.scoreVersionId)
    .field('cohortName', `Coding ${Date.now()} ${Math.random()}`)
    .attach('file', file);
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  return mapAndCheck(res.body.upload.id, mapping);
}
async function mapAndCheck(id: string, mapping: object): Promise<UploadView> {
  const mapped = await request(app)
    .post(`/api/uploads/${id}/mapping`)
    .set(await steward())
    .send({ mapping });
  expect(mapped.status, JSON.stringify(mapped.body)).toBe(202);
  await whenProcessed(id);
  return (
    await request(app)
      .get(`/api/uploads/${id}`)
      .set(await steward())
  ).body.upload as UploadView;
}
const versionsOf = async () => Number((await dataSource.query('SELECT count(*)::int AS n FROM cohort_versions'))[0].n);

describe('coding mismatch of an indicator predictor', () => {
  it('the mapping step states what the formula expects of each column', async () => {
    const { file } = fileWith('plain.csv', (v) => v);
    const res = await request(app)
      .post('/api/cohorts')
      .set(await steward())
      .field('scoreVersionId', score.scoreVersionId)
      .field('cohortName', `Coding plain ${Date.now()}`)
      .attach('file', file);
    const req = (res.body.upload as UploadView).requiredPredictors;
    expect(req.find((p) => p.column === 'emergency_admission')).toMatchObject({
      kind: 'text',
      transforms: ['indicator'],
      levels: ['yes'],
    });
    expect(req.find((p) => p.column === 'length_of_stay')).toMatchObject({
      kind: 'numeric',
      transforms: ['log'],
      levels: [],
      positiveOnly: true,
    });
    expect(req.find((p) => p.column === 'age')).toMatchObject({ transforms: ['linear'], range: { min: 0, max: 120 } });
  });

  it('Y/N against the level "yes": the check passes every row but the upload cannot be stored', async () => {
    const { file } = fileWith('yn.csv', (v) => (v === 'yes' ? 'Y' : 'N'));
    const u = await uploadAndCheck(file);
    expect(u.status).toBe('checked');
    expect(u.rowsRejected).toBe(0);
    expect(u.codingIssues).toHaveLength(1);
    const issue = u.codingIssues[0] as CodingIssue;
    expect(issue).toMatchObject({ predictor: 'emergency_admission', levels: ['yes'], absent: ['yes'] });
    expect(issue.unnamed.map((x) => x.value).sort()).toEqual(['N', 'Y']);
    expect(issue.message).toMatch(/"yes" never occurs/);
    const before = await versionsOf();
    const commit = await request(app)
      .post(`/api/uploads/${u.id}/commit`)
      .set(await steward())
      .send({ excludeRejected: true });
    expect(commit.status).toBe(409);
    expect(commit.body.error).toMatch(/coding does not match.*emergency_admission/);
    expect(await versionsOf()).toBe(before);
  });

  it('labels the formula does not name (yes / no / unknown), or "Yes" for "yes", also stop the upload', async () => {
    const three = await uploadAndCheck(fileWith('three.csv', (v, i) => (i % 10 === 0 ? 'unknown' : v)).file);
    expect(three.codingIssues.map((c) => c.predictor)).toEqual(['emergency_admission']);
    const cased = await uploadAndCheck(fileWith('cased.csv', (v, i) => (v === 'yes' && i % 2 ? 'Yes' : v)).file);
    expect(cased.codingIssues[0].message).toMatch(/only by case/);
    // The usual yes/no coding passes.
    const plain = await uploadAndCheck(fileWith('plain2.csv', (v) => v).file);
    expect(plain.codingIssues).toEqual([]);
  });

  it('mapping the labels to the level resolves it: the reading is stored with the mapping and applied to the rows', async () => {
    const { file, yes } = fileWith('yn2.csv', (v) => (v === 'yes' ? 'Y' : 'N'));
    const first = await uploadAndCheck(file);
    // Only indicator columns, and only into the formula's level (or none).
    const bad1 = await request(app)
      .post(`/api/uploads/${first.id}/mapping`)
      .set(await steward())
      .send({ mapping: { ...KESTREL_MAPPING, labels: { age: { '90+': 'yes' } } } });
    expect(bad1.status).toBe(400);
    const bad2 = await request(app)
      .post(`/api/uploads/${first.id}/mapping`)
      .set(await steward())
      .send({ mapping: { ...KESTREL_MAPPING, labels: { emergency_admission: { Y: 'true' } } } });
    expect(bad2.status).toBe(400);
    expect(bad2.body.error).toMatch(/can only be read as "yes"/);

    const labels = { emergency_admission: { Y: 'yes', N: '' } };
    const u = await mapAndCheck(first.id, { ...KESTREL_MAPPING, labels });
    expect(u.codingIssues).toEqual([]);
    const commit = await request(app)
      .post(`/api/uploads/${u.id}/commit`)
      .set(await steward())
      .send({ excludeRejected: true });
    expect(commit.status, JSON.stringify(commit.body)).toBe(201);
    const [v] = await dataSource.query('SELECT mapping FROM cohort_versions WHERE id = $1', [
      commit.body.cohortVersionId,
    ]);
    expect(v.mapping.labels).toEqual(labels);
    const data = await loadCohortData(commit.body.cohortVersionId);
    const stored = data.columns.emergency_admission;
    expect(stored.filter((x) => x === 'yes')).toHaveLength(yes);
    expect(new Set(stored)).toEqual(new Set(['yes', 'N']));
  });
});

describe('the run warns when an indicator level is absent or rare', () => {
  const runWarnings = async (emergency: (i: number) => string) => {
    const rows = kestrelRows(400, 5).map((r, i) => ({
      ...r,
      predictors: { ...r.predictors, emergency_admission: emergency(i) },
    }));
    const cohort = await createCohortFixture(rows);
    const runId = await recordRunNow(null, score.scoreVersionId, cohort.cohortVersionId, runSettingsSchema.parse({}));
    const [r] = await dataSource.query('SELECT results FROM validation_runs WHERE id = $1', [runId]);
    return (r.results as RunResults).overall.warnings;
  };

  it('absent, rare, and common levels', async () => {
    expect(await runWarnings(() => 'N')).toEqual(
      expect.arrayContaining([expect.stringMatching(/No patient has emergency_admission = "yes"/)]),
    );
    expect(await runWarnings((i) => (i < 3 ? 'yes' : 'no'))).toEqual(
      expect.arrayContaining([expect.stringMatching(/Only 3 patients \(0\.8%\) have emergency_admission = "yes"/)]),
    );
    expect((await runWarnings((i) => (i % 2 ? 'yes' : 'no'))).some((w) => /emergency_admission/.test(w))).toBe(false);
  });
});
