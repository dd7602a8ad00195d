// The steward's ways out of an upload: a same-name cohort answered in words with the way to add a version, unfinished
// uploads listed, chosen rejected rows excluded, the rejected rows as a CSV of their mapped values, the cohort template.
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import Papa from 'papaparse';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { whenProcessed } from '../../server/src/domain/cohorts/uploads';
import { app, bearer, dataSource, tokenFor, useDatabase } from '../helpers/api';
import { createScoreFixture, type ScoreFixture } from '../helpers/fixtures';

useDatabase();

const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-steward-test-'));
const run = `${Date.now()}`;
let score: ScoreFixture;
afterAll(() => rmSync(tmp, { recursive: true, force: true }));
beforeAll(async () => {
  score = await createScoreFixture({ name: `Steward flow score ${run}` });
});

const goodCsv = (n: number, seed: number) =>
  `${[...kestrelQuarterCsv({ year: 2025, quarter: 3, index: 6, n, seed })].join('\n')}\n`;
function writeCsv(name: string, text: string): string {
  const file = path.join(tmp, name);
  writeFileSync(file, text);
  return file;
}
async function upload(file: string, fields: Record<string, string>, token?: string) {
  let req = request(app)
    .post('/api/cohorts')
    .set(bearer(token ?? (await tokenFor('steward'))));
  for (const [k, v] of Object.entries({ scoreVersionId: score.scoreVersionId, ...fields })) req = req.field(k, v);
  return req.attach('file', file);
}
async function mapAndWait(id: string, mapping: object = KESTREL_MAPPING) {
  const res = await request(app)
    .post(`/api/uploads/${id}/mapping`)
    .set(bearer(await tokenFor('steward')))
    .send({ mapping });
  expect(res.status, JSON.stringify(res.body)).toBe(202);
  await whenProcessed(id);
  return (
    await request(app)
      .get(`/api/uploads/${id}`)
      .set(bearer(await tokenFor('steward')))
  ).body.upload;
}

/** 40 good rows with three bad ones: a length of stay that is not a number (line 5), an unknown outcome label (line 9), a ragged row (line 12). */
function fileWithBadRows(): string {
  const lines = goodCsv(40, 31).trimEnd().split('\n');
  const cells = lines[4].split(',');
  cells[1] = 'n/a';
  lines[4] = cells.join(',');
  const c9 = lines[8].split(',');
  c9[5] = 'perhaps';
  lines[8] = c9.join(',');
  lines[11] = `${lines[11]},Extra Text Never Sent`;
  return `${lines.join('\n')}\n`;
}

describe('a cohort name that exists', () => {
  it('is answered in words with the existing cohort, not an internal id, and the file is then added as its next version', async () => {
    const name = `Ward audit ${run}`;
    const first = await upload(writeCsv('v1.csv', goodCsv(30, 1)), { cohortName: name });
    expect(first.status, JSON.stringify(first.body)).toBe(201);
    await mapAndWait(first.body.upload.id);
    const stored = await request(app)
      .post(`/api/uploads/${first.body.upload.id}/commit`)
      .set(bearer(await tokenFor('steward')))
      .send({});
    expect(stored.status).toBe(201);

    const again = await upload(writeCsv('v2.csv', goodCsv(30, 2)), { cohortName: name.toUpperCase() });
    expect(again.status).toBe(409);
    expect(again.body.error).toMatch(
      new RegExp(`a cohort named "${name}" already exists: add this file as a new version of "${name}"`),
    );
    expect(again.body.error).not.toContain(stored.body.cohortId);
    expect(again.body.details).toEqual({ existingCohort: { id: stored.body.cohortId, name } });

    const asVersion = await upload(writeCsv('v2.csv', goodCsv(30, 2)), {
      cohortId: again.body.details.existingCohort.id,
    });
    expect(asVersion.status, JSON.stringify(asVersion.body)).toBe(201);
    expect(asVersion.body.upload.cohortId).toBe(stored.body.cohortId);
    await mapAndWait(asVersion.body.upload.id);
    const v2 = await request(app)
      .post(`/api/uploads/${asVersion.body.upload.id}/commit`)
      .set(bearer(await tokenFor('steward')))
      .send({});
    expect(v2.body).toMatchObject({ cohortId: stored.body.cohortId, version: 2 });
  });
});

describe('unfinished uploads', () => {
  it('are listed for the steward who started them, not for another steward, and leave the list when stored', async () => {
    const own = await upload(writeCsv('open.csv', goodCsv(20, 3)), { cohortName: `Unfinished ${run}` });
    expect(own.status).toBe(201);
    const mine = await request(app)
      .get('/api/uploads')
      .set(bearer(await tokenFor('steward')));
    expect(mine.body.uploads.map((u: { id: string }) => u.id)).toContain(own.body.upload.id);
    const other = await request(app)
      .get('/api/uploads')
      .set(bearer(await tokenFor('statistician')));
    expect(other.body.uploads.map((u: { id: string }) => u.id)).not.toContain(own.body.upload.id);
    expect(
      (
        await request(app)
          .get(`/api/uploads/${own.body.upload.id}`)
          .set(bearer(await tokenFor('statistician')))
      ).status,
    ).toBe(404);
    await request(app)
      .post(`/api/uploads/${own.body.upload.id}/discard`)
      .set(bearer(await tokenFor('steward')))
      .expect(200);
    const after = await request(app)
      .get('/api/uploads')
      .set(bearer(await tokenFor('steward')));
    expect(after.body.uploads.map((u: { id: string }) => u.id)).not.toContain(own.body.upload.id);
  });
});

describe('rejected rows', () => {
  it("the CSV carries each rejected row once with its reasons and mapped values, never unmapped columns or a ragged row's text", async () => {
    const text = fileWithBadRows();
    const res = await upload(writeCsv('bad.csv', text), { cohortName: `Rejections ${run}` });
    // Map all but the site column: site must then never appear in the download.
    const { site: _site, ...subgroups } = KESTREL_MAPPING.subgroups;
    const checked = await mapAndWait(res.body.upload.id, { ...KESTREL_MAPPING, subgroups });
    expect(checked.rowsRejected).toBe(3);
    const csv = await request(app)
      .get(`/api/uploads/${checked.id}/rejections.csv`)
      .set(bearer(await tokenFor('steward')));
    expect(csv.status).toBe(200);
    const parsed = Papa.parse<string[]>(csv.text.trim(), { skipEmptyLines: true }).data;
    const header = parsed[0];
    expect(header.slice(0, 2)).toEqual(['line', 'reason']);
    expect(header).toContain('age');
    expect(header).toContain('unit');
    expect(header).not.toContain('site');
    const byLine = new Map(parsed.slice(1).map((r) => [Number(r[0]), r]));
    expect([...byLine.keys()]).toEqual([5, 9, 12]);
    const source = text.split('\n');
    const sourceCells = (line: number) => source[line - 1].split(',');
    const fileHeader = source[0].split(',');
    // Each mapped value is the file's cell in that column.
    for (const line of [5, 9]) {
      for (const [k, col] of header.slice(2).entries())
        expect(byLine.get(line)![k + 2]).toBe(sourceCells(line)[fileHeader.indexOf(col)]);
    }
    expect(byLine.get(5)![1]).toMatch(/length_of_stay: length_of_stay must be a decimal number/);
    expect(byLine.get(9)![1]).toMatch(/readmitted_30d: the outcome must be one of/);
    expect(byLine.get(12)![1]).toMatch(/12 fields; the header has 11/);
    expect(
      byLine
        .get(12)!
        .slice(2)
        .every((c) => c === ''),
    ).toBe(true);
    expect(csv.text).not.toContain('Extra Text Never Sent');
    expect(csv.text).not.toContain('Main campus');

    // The fixed rows (the download, corrected) map with the same mapping and pass.
    const fixed = Papa.parse<string[]>(csv.text.trim(), { skipEmptyLines: true }).data.slice(0, 3);
    fixed[1][header.indexOf('length_of_stay')] = '4';
    fixed[2][header.indexOf('readmitted_30d')] = 'no';
    const onlyFixed = Papa.unparse(fixed.map((r) => r.slice(2)));
    const missing = fileHeader.filter((h) => !header.includes(h));
    expect(missing).toEqual(['site']);
    const again = await upload(writeCsv('fixed.csv', `${onlyFixed}\n`), { cohortName: `Fixed rows ${run}` });
    expect(again.status, JSON.stringify(again.body)).toBe(201);
    const rechecked = await mapAndWait(again.body.upload.id, { ...KESTREL_MAPPING, subgroups });
    expect({ accepted: rechecked.rowsAccepted, rejected: rechecked.rowsRejected }).toEqual({
      accepted: 2,
      rejected: 0,
    });
    await request(app)
      .post(`/api/uploads/${again.body.upload.id}/discard`)
      .set(bearer(await tokenFor('steward')))
      .expect(200);
  });

  it('chosen rows are excluded one by one: every rejected row must be chosen, and the audit names the lines', async () => {
    const res = await upload(writeCsv('bad2.csv', fileWithBadRows()), { cohortName: `Chosen exclusions ${run}` });
    const checked = await mapAndWait(res.body.upload.id);
    expect(checked.rowsRejected).toBe(3);
    const token = await tokenFor('steward');
    const partial = await request(app)
      .post(`/api/uploads/${checked.id}/commit`)
      .set(bearer(token))
      .send({ excludeLines: [5, 12] });
    expect(partial.status).toBe(409);
    expect(partial.body.error).toMatch(/1 rejected row\(s\) are neither excluded nor fixed \(line 9\)/);
    expect(partial.body.details).toEqual({ openLines: [9] });
    const wrong = await request(app)
      .post(`/api/uploads/${checked.id}/commit`)
      .set(bearer(token))
      .send({ excludeLines: [5, 9, 12, 13] });
    expect(wrong.status).toBe(400);
    expect(wrong.body.error).toMatch(/line\(s\) 13 were not rejected/);
    const [{ n: before }] = await dataSource.query('SELECT count(*)::int AS n FROM cohort_versions');
    expect(before).toBeGreaterThan(0);
    const stored = await request(app)
      .post(`/api/uploads/${checked.id}/commit`)
      .set(bearer(token))
      .send({ excludeLines: [12, 9, 5] });
    expect(stored.status, JSON.stringify(stored.body)).toBe(201);
    expect(stored.body).toMatchObject({ rowCount: 37, excludedCount: 3 });
    const [entry] = await dataSource.query(
      `SELECT details FROM audit_log WHERE action = 'cohort.version.stored' AND target_id = $1`,
      [stored.body.cohortVersionId],
    );
    expect(entry.details.excludedLines).toEqual([5, 9, 12]);
  });
});

describe('the cohort template of a score version', () => {
  it('is a CSV header of the predictor columns, the outcome and the period, for the roles that read scores', async () => {
    const res = await request(app)
      .get(`/api/scores/${score.scoreId}/versions/1/template.csv`)
      .set(bearer(await tokenFor('steward')));
    expect(res.status).toBe(200);
    expect(res.headers['content-type']).toMatch(/text\/csv/);
    expect(res.headers['content-disposition']).toMatch(/cohort-template\.csv/);
    const predictors = [...new Set(score.model!.predictors.map((p) => p.column))];
    expect(res.text).toBe(`${[...predictors, 'outcome', 'period'].join(',')}\r\n`);
    expect(
      (
        await request(app)
          .get(`/api/scores/${score.scoreId}/versions/9/template.csv`)
          .set(bearer(await tokenFor('steward')))
      ).status,
    ).toBe(404);
    expect(
      (
        await request(app)
          .get(`/api/scores/${score.scoreId}/versions/1/template.csv`)
          .set(bearer(await tokenFor('clinician')))
      ).status,
    ).toBe(403);
  });
  it('uploaded as it comes (with rows added), it is mapped without changes', async () => {
    const res = await request(app)
      .get(`/api/scores/${score.scoreId}/versions/1/template.csv`)
      .set(bearer(await tokenFor('steward')));
    const header = res.text.trim().split(',');
    const row = header.map(
      (h) =>
        ({
          age: '70',
          length_of_stay: '4',
          prior_admissions: '1',
          emergency_admission: 'yes',
          charlson_index: '2',
          outcome: '1',
          period: '2026-01',
        })[h] ?? '1',
    );
    const file = writeCsv('template.csv', `${res.text}${row.join(',')}\r\n${row.join(',')}\r\n`);
    const up = await upload(file, { cohortName: `From template ${run}` });
    expect(up.status, JSON.stringify(up.body)).toBe(201);
    const suggested = up.body.upload.suggestedMapping;
    expect(suggested.outcome.column).toBe('outcome');
    expect(suggested.date).toEqual({ column: 'period' });
    for (const p of score.model!.predictors) expect(suggested.predictors[p.column]).toBe(p.column);
    await request(app)
      .post(`/api/uploads/${up.body.upload.id}/discard`)
      .set(bearer(await tokenFor('steward')))
      .expect(200);
    expect(readFileSync(file, 'utf8')).toContain('period');
  });
});
