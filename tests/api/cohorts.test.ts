// Cohort uploads end to end against the real PostgreSQL: roles, the bad-file corpus, the screen, row checks, storage.
import { createHash } from 'node:crypto';
import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync, createWriteStream } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Role } from '@shared/roles';
import { ROLES } from '@shared/roles';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { uploadDir } from '../../server/src/http/routes/cohorts';
import { loadCohortData } from '../../server/src/domain/cohorts/cohortData';
import { whenProcessed } from '../../server/src/domain/cohorts/uploads';
import { discardStaleUploads } from '../../server/src/domain/cohorts/uploadSweep';
import { FIXTURE_MODEL } from '../helpers/fixtures';
import { app, bearer, countRows, dataSource, ownerQuery, tokenFor, useDatabase } from '../helpers/api';

useDatabase();

const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-cohort-test-'));
let formulaVersionId = '';
let suppliedVersionId = '';
const run = `${Date.now()}`;

beforeAll(async () => {
  // Our own test score (the Kestrel formula of the invented demo), created directly so this file needs no other team.
  const model = FIXTURE_MODEL;
  const [s] = await dataSource.query(
    `INSERT INTO scores (name, outcome_definition, time_horizon, intended_population, citation, caution_text)
     VALUES ($1, 'readmission', '30 days', 'adults', 'invented for tests', 'not medical advice') RETURNING id`,
    [`Upload test score ${run}`],
  );
  const [v1] = await dataSource.query(
    `INSERT INTO score_versions (score_id, version, mode, model) VALUES ($1, 1, 'formula', $2) RETURNING id`,
    [s.id, JSON.stringify(model)],
  );
  const [v2] = await dataSource.query(
    `INSERT INTO score_versions (score_id, version, mode, probability_column) VALUES ($1, 2, 'supplied', 'vendor_probability') RETURNING id`,
    [s.id],
  );
  formulaVersionId = v1.id;
  suppliedVersionId = v2.id;
});

afterAll(() => rmSync(tmp, { recursive: true, force: true }));

function writeCsv(name: string, text: string | Buffer): string {
  const file = path.join(tmp, name);
  writeFileSync(file, text);
  return file;
}

const goodCsv = (n = 200, seed = 7) =>
  `${[...kestrelQuarterCsv({ year: 2025, quarter: 2, index: 5, n, seed })].join('\n')}\n`;

/** What is stored: cohorts, versions and the rows of stored versions (a checked upload's staged rows are not a cohort). */
async function snapshot() {
  const [{ n }] = await dataSource.query(
    'SELECT coalesce(sum(row_count), 0)::int AS n FROM cohort_row_blocks b WHERE EXISTS (SELECT 1 FROM cohort_versions v WHERE v.id = b.cohort_version_id)',
  );
  return { versions: await countRows('cohort_versions'), rows: n as number, cohorts: await countRows('cohorts') };
}

const stagedRows = async (uploadId: string) => {
  const [{ n }] = await dataSource.query(
    'SELECT coalesce(sum(row_count), 0)::int AS n FROM cohort_row_blocks b JOIN cohort_uploads u ON u.planned_version_id = b.cohort_version_id WHERE u.id = $1',
    [uploadId],
  );
  return n as number;
};

const tempFiles = (): string[] => {
  try {
    return readdirSync(uploadDir);
  } catch {
    return [];
  }
};

async function upload(file: string, fields: Record<string, string> = {}, role: Role = 'steward') {
  let req = request(app)
    .post('/api/cohorts')
    .set(bearer(await tokenFor(role)));
  const all = {
    scoreVersionId: formulaVersionId,
    cohortName: `Test cohort ${run} ${Math.random().toString(36).slice(2, 8)}`,
    ...fields,
  };
  for (const [k, v] of Object.entries(all)) req = req.field(k, v);
  return req.attach('file', file);
}

async function mapAndWait(id: string, mapping: object = KESTREL_MAPPING, role: Role = 'steward') {
  const res = await request(app)
    .post(`/api/uploads/${id}/mapping`)
    .set(bearer(await tokenFor(role)))
    .send({ mapping });
  expect(res.status, JSON.stringify(res.body)).toBe(202);
  await whenProcessed(id);
  const got = await request(app)
    .get(`/api/uploads/${id}`)
    .set(bearer(await tokenFor(role)));
  return got.body.upload;
}

/** Uploads a file and expects a refusal with this status; the database and the temp folder are unchanged. */
async function expectRefused(file: string, status: number, message: RegExp, fields: Record<string, string> = {}) {
  const before = await snapshot();
  const files = tempFiles();
  const res = await upload(file, fields);
  expect(res.status, JSON.stringify(res.body)).toBe(status);
  expect(res.body.error).toMatch(message);
  expect(await snapshot()).toEqual(before);
  // The response can leave before the unlink of a refused temp file completes. No file is added (earlier tests'
  // uploads may finish and remove theirs meanwhile, so the folder may also shrink).
  await expect.poll(() => tempFiles().filter((f) => !files.includes(f))).toEqual([]);
  return res.body;
}

describe('good upload end to end', () => {
  it('screens, maps, checks and stores the right counts and the SHA-256 of the file', async () => {
    const text = goodCsv(300);
    const file = writeCsv('good.csv', text);
    const before = await snapshot();
    const res = await upload(file, { label: '2025-Q2' });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const u = res.body.upload;
    expect(u.status).toBe('pending');
    expect(u.sha256).toBe(createHash('sha256').update(readFileSync(file)).digest('hex'));
    expect(u.headers).toContain('discharge_date');
    expect(u.suggestedMapping.predictors.length_of_stay).toBe('length_of_stay');
    expect(u.suggestedMapping.outcome).toMatchObject({ column: 'readmitted_30d', positive: ['yes'], negative: ['no'] });
    expect(u.warnings.some((w: { category: string }) => w.category === 'dates')).toBe(true);

    const checked = await mapAndWait(u.id);
    expect(checked.status).toBe('checked');
    expect(checked.rowsRead).toBe(300);
    expect(checked.rowsRejected).toBe(0);
    const yes = text
      .split('\n')
      .slice(1)
      .filter((l) => l.split(',')[5] === 'yes').length;
    expect(checked.events).toBe(yes);
    expect(checked.columnSummary.age.kind).toBe('numeric');

    const commit = await request(app)
      .post(`/api/uploads/${u.id}/commit`)
      .set(bearer(await tokenFor('steward')))
      .send({ excludeRejected: false });
    expect(commit.status, JSON.stringify(commit.body)).toBe(201);
    expect(commit.body).toMatchObject({ rowCount: 300, events: yes, excludedCount: 0, version: 1, sha256: u.sha256 });
    expect(await snapshot()).toEqual({
      versions: before.versions + 1,
      rows: before.rows + 300,
      cohorts: before.cohorts + 1,
    });

    const [v] = await dataSource.query(
      'SELECT source_sha256, row_count, events, period_start::text AS ps, period_end::text AS pe FROM cohort_versions WHERE id = $1',
      [commit.body.cohortVersionId],
    );
    expect(v).toMatchObject({
      source_sha256: u.sha256,
      row_count: 300,
      events: yes,
      ps: '2025-04-01',
      pe: '2025-06-30',
    });
    const data = await loadCohortData(commit.body.cohortVersionId);
    expect(data.n).toBe(300);
    expect(data.outcome.reduce((a, b) => a + b, 0)).toBe(yes);
    expect(data.lineNo[0]).toBe(2);
    const firstRow = text.split('\n')[1].split(',');
    expect(data.columns.length_of_stay[0]).toBe(Number(firstRow[1]));
    expect(data.columns.emergency_admission[0]).toBe(firstRow[3]);
    expect(data.subgroups.unit[0]).toBe(firstRow[9]);
    expect(data.eventDate[0]).toBe(`${firstRow[6]}-01`);

    // Stored versions are immutable, the upload cannot be stored twice, and the temp files are gone.
    await expect(
      dataSource.query('DELETE FROM cohort_row_blocks WHERE cohort_version_id = $1', [commit.body.cohortVersionId]),
    ).rejects.toThrow();
    expect(
      (
        await request(app)
          .post(`/api/uploads/${u.id}/commit`)
          .set(bearer(await tokenFor('steward')))
          .send({ excludeRejected: true })
      ).status,
    ).toBe(409);
    expect(
      (
        await request(app)
          .post(`/api/uploads/${u.id}/discard`)
          .set(bearer(await tokenFor('steward')))
      ).status,
    ).toBe(409);

    // Reading: list, detail, version detail, rows paged/sorted/searched.
    const token = await tokenFor('chair');
    const list = await request(app).get('/api/cohorts').query({ search: run, pageSize: 100 }).set(bearer(token));
    expect(list.status).toBe(200);
    expect(list.body.cohorts.some((c: { id: string }) => c.id === commit.body.cohortId)).toBe(true);
    const detail = await request(app).get(`/api/cohorts/${commit.body.cohortId}`).set(bearer(token));
    expect(detail.body.versions[0]).toMatchObject({ version: 1, rowCount: 300, sourceSha256: u.sha256 });
    const ver = await request(app).get(`/api/cohorts/${commit.body.cohortId}/versions/1`).set(bearer(token));
    expect(ver.body.version.columnSummary.unit.kind).toBe('categorical');
    const rows = await request(app)
      .get(`/api/cohorts/${commit.body.cohortId}/versions/1/rows`)
      .query({ page: 2, pageSize: 10, sortBy: 'age', sortDir: 'desc' })
      .set(bearer(token));
    expect(rows.status, JSON.stringify(rows.body)).toBe(200);
    expect(rows.body.total).toBe(300);
    expect(rows.body.rows).toHaveLength(10);
    const ages = rows.body.rows.map((r: { predictors: { age: number } }) => r.predictors.age);
    expect([...ages].sort((a, b) => b - a)).toEqual(ages);
    const search = await request(app)
      .get(`/api/cohorts/${commit.body.cohortId}/versions/1/rows`)
      .query({ search: 'Rowan' })
      .set(bearer(token));
    expect(search.body.total).toBe(data.subgroups.unit.filter((x) => x === 'Rowan').length);
    expect(
      (
        await request(app)
          .get(`/api/cohorts/${commit.body.cohortId}/versions/1/rows`)
          .query({ sortBy: 'nonsense' })
          .set(bearer(token))
      ).status,
    ).toBe(400);
    expect((await request(app).get(`/api/cohorts/${commit.body.cohortId}/versions/9`).set(bearer(token))).status).toBe(
      404,
    );

    // A corrected file for the same cohort becomes version 2.
    const again = await upload(writeCsv('good2.csv', goodCsv(50, 8)), {
      cohortName: '',
      cohortId: commit.body.cohortId,
    });
    expect(again.status, JSON.stringify(again.body)).toBe(201);
    await mapAndWait(again.body.upload.id);
    const c2 = await request(app)
      .post(`/api/uploads/${again.body.upload.id}/commit`)
      .set(bearer(await tokenFor('steward')))
      .send({});
    expect(c2.body).toMatchObject({ version: 2, rowCount: 50 });
  });

  it('reads semicolon-separated UTF-8 with a BOM and quoted fields', async () => {
    const text =
      '\uFEFF' +
      goodCsv(40)
        .replace(/,/g, ';')
        .replace(/Main campus/g, '"Main; campus"');
    const res = await upload(writeCsv('semi.csv', text));
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    expect(res.body.upload.delimiter).toBe(';');
    expect(res.body.upload.headers[0]).toBe('age');
    const checked = await mapAndWait(res.body.upload.id);
    expect(checked.rowsAccepted).toBe(40);
    expect(checked.columnSummary.site.levels.map((l: { value: string }) => l.value)).toContain('Main; campus');
    await request(app)
      .post(`/api/uploads/${res.body.upload.id}/discard`)
      .set(bearer(await tokenFor('steward')))
      .expect(200);
  });
});

describe('quotes late in the file', () => {
  it('a file with a late quoted cell gives the same rows as the file without it', async () => {
    const body = goodCsv(30_000, 12);
    const lines = body.trimEnd().split('\n');
    const quoted = [...lines];
    quoted[quoted.length - 2] = quoted[quoted.length - 2].replace(/,([^,]*)$/, ',"$1"');
    const a = await upload(writeCsv('plain-twin.csv', body));
    const b = await upload(writeCsv('quoted-twin.csv', `${quoted.join('\n')}\n`));
    const ua = await mapAndWait(a.body.upload.id);
    const ub = await mapAndWait(b.body.upload.id);
    expect(ub.status).toBe('checked');
    expect({
      read: ub.rowsRead,
      accepted: ub.rowsAccepted,
      rejected: ub.rowsRejected,
      events: ub.events,
      summary: ub.columnSummary,
    }).toEqual({
      read: ua.rowsRead,
      accepted: ua.rowsAccepted,
      rejected: ua.rowsRejected,
      events: ua.events,
      summary: ua.columnSummary,
    });
  });
});

describe('waiting for the row checks', () => {
  it('GET with waitSeconds answers once the check has ended; out-of-range waits are refused', async () => {
    const res = await upload(writeCsv('wait.csv', goodCsv(30_000, 13)));
    expect(res.status).toBe(201);
    const id = res.body.upload.id;
    const mapped = await request(app)
      .post(`/api/uploads/${id}/mapping`)
      .set(bearer(await tokenFor('steward')))
      .send({ mapping: KESTREL_MAPPING });
    expect(mapped.status).toBe(202);
    expect(mapped.body.upload.status).toBe('processing');
    // No job worker runs in this test process: whenProcessed takes the check's job here, while the GET waits for it.
    const checking = whenProcessed(id);
    const got = await request(app)
      .get(`/api/uploads/${id}`)
      .query({ waitSeconds: 30 })
      .set(bearer(await tokenFor('steward')));
    await checking;
    expect(got.status).toBe(200);
    expect(got.body.upload.status).toBe('checked');
    expect(got.body.upload.rowsRead).toBe(30_000);
    const bad = await request(app)
      .get(`/api/uploads/${id}`)
      .query({ waitSeconds: 99 })
      .set(bearer(await tokenFor('steward')));
    expect(bad.status).toBe(400);
    expect(bad.body.error).toMatch(/waitSeconds/);
  });
});

describe('the demo fixture with bad rows', () => {
  it('lists rejected rows, refuses to store them silently, and stores with the exclusions recorded', async () => {
    const fixture = path.resolve('tests/fixtures/kestrel-2026q1.csv');
    const res = await upload(fixture);
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const id = res.body.upload.id;
    const checked = await mapAndWait(id);
    expect(checked.rowsRead).toBe(500);
    expect(checked.rowsRejected).toBe(5);
    expect(checked.rowsAccepted).toBe(495);
    const token = await tokenFor('steward');
    const page1 = await request(app)
      .get(`/api/uploads/${id}/rejections`)
      .query({ page: 1, pageSize: 3 })
      .set(bearer(token));
    expect(page1.body.total).toBe(5);
    expect(page1.body.rejections).toHaveLength(3);
    expect(page1.body.rejections[0]).toMatchObject({ line: 13, column: 'readmitted_30d', value: 'maybe' });
    const page2 = await request(app)
      .get(`/api/uploads/${id}/rejections`)
      .query({ page: 2, pageSize: 3 })
      .set(bearer(token));
    expect(page2.body.rejections).toHaveLength(2);
    const all = [...page1.body.rejections, ...page2.body.rejections];
    expect(all.find((r) => r.line === 41)).toMatchObject({
      column: 'age',
      value: '130',
      reason: expect.stringMatching(/between 0 and 120/),
    });
    expect(all.find((r) => r.line === 78)).toMatchObject({
      column: 'length_of_stay',
      reason: expect.stringMatching(/missing/),
    });
    const csv = await request(app).get(`/api/uploads/${id}/rejections.csv`).set(bearer(token));
    expect(csv.headers['content-type']).toMatch(/text\/csv/);
    expect(csv.text.trim().split('\n')).toHaveLength(6);

    const before = await snapshot();
    const refused = await request(app)
      .post(`/api/uploads/${id}/commit`)
      .set(bearer(token))
      .send({ excludeRejected: false });
    expect(refused.status).toBe(409);
    expect(refused.body.error).toMatch(/5 row\(s\) were rejected/);
    expect(await snapshot()).toEqual(before);
    const stored = await request(app)
      .post(`/api/uploads/${id}/commit`)
      .set(bearer(token))
      .send({ excludeRejected: true });
    expect(stored.status).toBe(201);
    expect(stored.body).toMatchObject({ rowCount: 495, excludedCount: 5 });
    const [v] = await dataSource.query('SELECT exclusions FROM cohort_versions WHERE id = $1', [
      stored.body.cohortVersionId,
    ]);
    expect(v.exclusions).toEqual(
      expect.arrayContaining([
        { reason: 'outcome not a known label', count: 2 },
        { reason: 'age out of range', count: 1 },
        { reason: 'missing length_of_stay', count: 2 },
      ]),
    );
  });
});

describe('bad files: a clear 4xx, nothing stored', () => {
  it('empty file', async () => {
    await expectRefused(writeCsv('empty.csv', ''), 422, /empty/);
  });
  it('header only', async () => {
    await expectRefused(writeCsv('header.csv', goodCsv(1).split('\n')[0] + '\n'), 422, /no data rows/);
  });
  it('wrong delimiter (tabs)', async () => {
    await expectRefused(writeCsv('tabs.tsv', goodCsv(5).replace(/,/g, '\t')), 422, /tabs/);
  });
  it('binary garbage', async () => {
    const bytes = Buffer.alloc(4096);
    for (let i = 0; i < bytes.length; i++) bytes[i] = (i * 131 + 7) % 256;
    await expectRefused(writeCsv('garbage.bin', bytes), 415, /not text|UTF-8|binary/);
  });
  it('invalid UTF-8', async () => {
    await expectRefused(writeCsv('latin1.csv', Buffer.from('age,sex\n45,M\xe9le\n', 'latin1')), 415, /UTF-8/);
  });
  it('duplicate header', async () => {
    await expectRefused(writeCsv('dup.csv', 'age,age,sex\n1,2,F\n'), 422, /twice/);
  });
  it('no file, missing fields, unknown score version, unknown cohort, name taken', async () => {
    const token = await tokenFor('steward');
    expect(
      (await request(app).post('/api/cohorts').set(bearer(token)).send({ scoreVersionId: formulaVersionId })).status,
    ).toBe(400);
    const noFile = await request(app)
      .post('/api/cohorts')
      .set(bearer(token))
      .field('scoreVersionId', formulaVersionId)
      .field('cohortName', 'x');
    expect(noFile.status).toBe(400);
    const file = writeCsv('ok.csv', goodCsv(5));
    await expectRefused(file, 400, /scoreVersionId/, { scoreVersionId: 'nope' });
    await expectRefused(file, 400, /either cohortId/, { cohortName: '' });
    await expectRefused(file, 404, /score version not found/, {
      scoreVersionId: '00000000-0000-4000-8000-000000000000',
    });
    await expectRefused(file, 404, /cohort not found/, {
      cohortName: '',
      cohortId: '00000000-0000-4000-8000-000000000000',
    });
    const [c] = await dataSource.query('SELECT name FROM cohorts LIMIT 1');
    if (c) await expectRefused(file, 409, /exists/, { cohortName: c.name });
  });
  it('a 100 MB file over the 64 MB limit', async () => {
    const file = path.join(tmp, 'big.csv');
    const out = createWriteStream(file);
    const line = goodCsv(2000);
    let size = 0;
    while (size < 100 * 1024 * 1024) {
      out.write(line);
      size += line.length;
    }
    await new Promise<void>((r) => out.end(() => r()));
    const body = await expectRefused(file, 413, /larger than the upload limit of 64 MB/);
    expect(body.error).toMatch(/PLUMBLINE_UPLOAD_LIMIT_MB/);
    rmSync(file);
  });
});

describe('row checks: listed rejections', () => {
  const lines = () => goodCsv(30).trimEnd().split('\n');
  const withCell = (rows: string[], line: number, col: number, value: string) => {
    const c = rows[line - 1].split(',');
    c[col] = value;
    rows[line - 1] = c.join(',');
    return rows;
  };
  async function checkedUpload(name: string, rows: string[], mapping: object = KESTREL_MAPPING) {
    const res = await upload(writeCsv(name, rows.join('\n') + '\n'));
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const before = await snapshot();
    const u = await mapAndWait(res.body.upload.id, mapping);
    const rej = await request(app)
      .get(`/api/uploads/${u.id}/rejections`)
      .query({ pageSize: 100 })
      .set(bearer(await tokenFor('steward')));
    expect(await snapshot()).toEqual(before);
    return { u, rejections: rej.body.rejections as { line: number; column: string; value: string; reason: string }[] };
  }

  it('ragged rows', async () => {
    const rows = lines();
    rows[4] += ',extra';
    rows[7] = rows[7].split(',').slice(0, 5).join(',');
    const { u, rejections } = await checkedUpload('ragged.csv', rows);
    expect(u.rowsRejected).toBe(2);
    expect(rejections.map((r) => r.line)).toEqual([5, 8]);
    expect(rejections[0].reason).toMatch(/12 fields; the header has 11/);
  });
  it('outcomes of 2 and "maybe"', async () => {
    const { rejections } = await checkedUpload('outcome.csv', withCell(withCell(lines(), 3, 5, '2'), 6, 5, 'maybe'));
    expect(rejections.map((r) => [r.line, r.value])).toEqual([
      [3, '2'],
      [6, 'maybe'],
    ]);
    expect(rejections[0].reason).toMatch(/must be one of yes, no/);
  });
  it('non-numeric predictors, non-positive log predictors, missing values', async () => {
    const rows = withCell(withCell(withCell(lines(), 2, 2, 'three'), 4, 1, '0'), 9, 4, '');
    const { rejections } = await checkedUpload('nonnumeric.csv', rows);
    expect(rejections.map((r) => [r.line, r.column])).toEqual([
      [2, 'prior_admissions'],
      [4, 'length_of_stay'],
      [9, 'charlson_index'],
    ]);
    expect(rejections[0].reason).toMatch(/must be a decimal number/);
    expect(rejections[1].reason).toMatch(/logarithm/);
    expect(rejections[2].reason).toMatch(/missing/);
  });
  it('formula-looking cells are rejected and neutralised in the CSV download', async () => {
    const rows = withCell(withCell(lines(), 3, 9, '=HYPERLINK("http://x.invalid"'), 5, 7, '@SUM(A1)');
    const res = await upload(writeCsv('formula.csv', rows.join('\n') + '\n'));
    expect(res.body.upload.warnings.some((w: { category: string }) => w.category === 'formula cells')).toBe(true);
    const u = await mapAndWait(res.body.upload.id);
    expect(u.rowsRejected).toBe(2);
    const csv = await request(app)
      .get(`/api/uploads/${u.id}/rejections.csv`)
      .set(bearer(await tokenFor('steward')));
    expect(csv.text).toContain(`"'=HYPERLINK(""http://x.invalid""`);
    expect(csv.text).toContain("'@SUM(A1)");
    expect(csv.text.split('\n').some((l) => /,[=@+-]/.test(l))).toBe(false);
  });
  it('a supplied probability outside [0, 1]', async () => {
    const text = 'vendor_probability,outcome,unit\n0.2,1,Birch\n1.4,0,Cedar\n-0.1,0,Alder\n0.5,0,Rowan\n';
    const res = await upload(writeCsv('prob.csv', text), { scoreVersionId: suppliedVersionId });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    expect(res.body.upload.requiredPredictors).toEqual([
      {
        column: 'vendor_probability',
        kind: 'numeric',
        positiveOnly: false,
        transforms: ['supplied probability'],
        levels: [],
        unit: null,
        range: { min: 0, max: 1 },
      },
    ]);
    const u = await mapAndWait(res.body.upload.id, {
      predictors: { vendor_probability: 'vendor_probability' },
      outcome: { column: 'outcome' },
      subgroups: { unit: 'unit' },
    });
    expect(u.rowsAccepted).toBe(2);
    expect(u.rowsRejected).toBe(2);
  });
  it('a mapping that does not fit the file is a 400 naming the problem', async () => {
    const res = await upload(writeCsv('m.csv', goodCsv(5)));
    const bad = await request(app)
      .post(`/api/uploads/${res.body.upload.id}/mapping`)
      .set(bearer(await tokenFor('steward')))
      .send({
        mapping: {
          ...KESTREL_MAPPING,
          predictors: { ...KESTREL_MAPPING.predictors, age: 'no_such_column' },
          outcome: { column: 'readmitted_30d', positive: ['yes'], negative: ['yes'] },
        },
      });
    expect(bad.status).toBe(400);
    expect(bad.body.error).toMatch(/no column "no_such_column"/);
    expect(bad.body.error).toMatch(/both positive and negative/);
    const missing = await request(app)
      .post(`/api/uploads/${res.body.upload.id}/mapping`)
      .set(bearer(await tokenFor('steward')))
      .send({ mapping: { outcome: { column: 'x' } } });
    expect(missing.status).toBe(400);
  });
  it('an identifier beyond the screened sample refuses the whole upload during the full pass', async () => {
    const rows = goodCsv(5200).trimEnd().split('\n');
    withCell(rows, 5150, 9, 'nell.varga@example.org');
    const res = await upload(writeCsv('late.csv', rows.join('\n') + '\n'));
    expect(res.status).toBe(201);
    const u = await mapAndWait(res.body.upload.id);
    expect(u.status).toBe('refused');
    expect(u.error).toMatch(/e-mail/);
    expect(u.warnings[0]).toMatchObject({ column: 'unit', category: 'e-mail addresses' });
    expect(
      (
        await request(app)
          .get(`/api/uploads/${u.id}/rejections`)
          .set(bearer(await tokenFor('steward')))
      ).body.total,
    ).toBe(0);
    expect(
      (
        await request(app)
          .post(`/api/uploads/${u.id}/commit`)
          .set(bearer(await tokenFor('steward')))
          .send({ excludeRejected: true })
      ).status,
    ).toBe(409);
  });
});

describe('the de-identification screen refuses each identifier category', () => {
  const base = goodCsv(30).trimEnd().split('\n');
  const addColumn = (header: string, values: (i: number) => string) =>
    base.map((l, i) => (i === 0 ? `${l},${header}` : `${l},${values(i)}`)).join('\n') + '\n';
  const cases: [string, string, (i: number) => string, string][] = [
    ['names (header)', 'patient_name', () => 'x', 'names'],
    [
      'names (content)',
      'contact',
      (i) =>
        ['Mara Quill', 'Oskar Brandt', 'Lena Moss', 'Ivo Pereira', 'Ruth Ashdown'][i % 5] +
        (i > 5 ? ` ${String.fromCharCode(65 + (i % 26))}ale` : ''),
      'names',
    ],
    ['geographic (street address)', 'home', (i) => `${10 + i} Juniper Road`, 'geographic subdivision'],
    ['geographic (5-digit ZIP)', 'zip', (i) => String(10000 + i * 37), 'geographic subdivision'],
    ['dates (birth)', 'dob', () => '1950-03-14', 'dates'],
    ['dates (full admission date)', 'admitted_on', (i) => `2025-04-${String((i % 28) + 1).padStart(2, '0')}`, 'dates'],
    ['telephone', 'contact_number', (i) => `(555) 201-${String(1000 + i)}`, 'telephone numbers'],
    ['fax', 'fax', (i) => `+1 555 301 ${String(1000 + i)}`, 'fax numbers'],
    ['e-mail', 'contact', (i) => `person${i}@example.org`, 'e-mail addresses'],
    ['social security numbers', 'ref', (i) => `123-45-${String(1000 + i)}`, 'social security numbers'],
    ['medical record numbers (header)', 'mrn', (i) => `${i}`, 'medical record numbers'],
    ['health plan beneficiary numbers', 'member_id', (i) => `${i}`, 'health plan beneficiary numbers'],
    ['account numbers', 'account_number', (i) => `${i}`, 'account numbers'],
    ['certificate/licence numbers', 'licence_no', (i) => `${i}`, 'certificate/licence numbers'],
    ['vehicle identifiers', 'car', (i) => `1HGCM82633A00${String(4352 + i).padStart(4, '0')}`, 'vehicle identifiers'],
    ['device identifiers', 'pump', (i) => `00:1A:2B:3C:4D:${String(10 + i).padStart(2, '0')}`, 'device identifiers'],
    ['web URLs', 'page', (i) => `https://portal.example.org/p/${i}`, 'web URLs'],
    ['IP addresses', 'client', (i) => `10.0.3.${i}`, 'IP addresses'],
    ['biometric identifiers', 'fingerprint', () => 'x', 'biometric identifiers'],
    ['full-face photographs', 'photo', () => 'x', 'full-face photographs'],
    [
      'other unique identifying numbers',
      'code',
      (i) => `KX${String(4000000 + i * 7919)}`,
      'unique identifying numbers',
    ],
  ];
  it.each(cases)('%s', async (_label, header, values, category) => {
    const body = await expectRefused(
      writeCsv(`id-${header}.csv`, addColumn(header, values)),
      422,
      /de-identification screen/,
    );
    expect(body.details.columns).toEqual(
      expect.arrayContaining([expect.objectContaining({ column: header, category })]),
    );
    expect(body.details.columns.find((c: { column: string }) => c.column === header).reason.length).toBeGreaterThan(10);
  });
  it('ages over 89 unless grouped as 90+', async () => {
    const rows = base.map((l, i) => (i === 3 ? l.replace(/^[^,]+/, '93') : l));
    const body = await expectRefused(writeCsv('age93.csv', rows.join('\n') + '\n'), 422, /de-identification/);
    expect(body.details.columns[0]).toMatchObject({ column: 'age', category: 'ages over 89' });
    const grouped = await upload(
      writeCsv('age90plus.csv', base.map((l, i) => (i === 3 ? l.replace(/^[^,]+/, '90+') : l)).join('\n') + '\n'),
    );
    expect(grouped.status).toBe(201);
    const u = await mapAndWait(grouped.body.upload.id);
    expect(u.rowsRejected).toBe(0);
    expect(u.columnSummary.age.max).toBeGreaterThanOrEqual(90);
  });
});

describe('saved mappings', () => {
  it('saves, lists and reuses a mapping; validates its shape', async () => {
    const token = await tokenFor('statistician');
    const saved = await request(app)
      .post('/api/mappings')
      .set(bearer(token))
      .send({ name: `Kestrel quarterly ${run}`, mapping: KESTREL_MAPPING });
    expect(saved.status, JSON.stringify(saved.body)).toBe(201);
    const list = await request(app).get('/api/mappings').set(bearer(token));
    expect(
      list.body.mappings.find((m: { id: string }) => m.id === saved.body.mapping.id).mapping.outcome.positive,
    ).toEqual(['yes']);
    expect(
      (
        await request(app)
          .post('/api/mappings')
          .set(bearer(token))
          .send({ name: 'x', mapping: { predictors: {} } })
      ).status,
    ).toBe(400);
    // Saving during the mapping step.
    const res = await upload(writeCsv('save.csv', goodCsv(5)), {}, 'statistician');
    const m = await request(app)
      .post(`/api/uploads/${res.body.upload.id}/mapping`)
      .set(bearer(token))
      .send({ mapping: KESTREL_MAPPING, saveAs: `while mapping ${run}` });
    expect(m.status).toBe(202);
    await whenProcessed(res.body.upload.id);
    expect(
      (await request(app).get('/api/mappings').set(bearer(token))).body.mappings.some(
        (x: { name: string }) => x.name === `while mapping ${run}`,
      ),
    ).toBe(true);
  });
});

describe('storage is all or nothing', () => {
  // Faults are injected in PostgreSQL itself: a constraint added NOT VALID (existing rows untouched) that the next
  // write breaks, so the failure happens inside the real COPY or the real commit transaction.
  const fault = async (table: string, check: string, body: () => Promise<void>) => {
    // Only the owner may change a table; the API's role (which the upload runs as) may not.
    await ownerQuery(`ALTER TABLE ${table} ADD CONSTRAINT plumbline_test_fault CHECK (${check}) NOT VALID`);
    try {
      await body();
    } finally {
      await ownerQuery(`ALTER TABLE ${table} DROP CONSTRAINT plumbline_test_fault`);
    }
  };

  it('a failure during the COPY of the checked rows rolls back: the upload fails, no row, no rejection is left', async () => {
    const res = await upload(writeCsv('atomic-copy.csv', goodCsv(100)));
    const before = await snapshot();
    await fault('cohort_row_blocks', 'NOT (60 = ANY (line_no))', async () => {
      const u = await mapAndWait(res.body.upload.id);
      expect(u.status).toBe('failed');
      expect(u.error).toMatch(/could not be processed.*nothing was stored/);
      expect(u.error).not.toMatch(/plumbline_test_fault|cohort_row_blocks|constraint/);
    });
    expect(await stagedRows(res.body.upload.id)).toBe(0);
    expect(
      (
        await dataSource.query('SELECT count(*)::int AS n FROM cohort_upload_rejections WHERE upload_id = $1', [
          res.body.upload.id,
        ])
      )[0].n,
    ).toBe(0);
    expect(await snapshot()).toEqual(before);
    // Mapping again after the fault is gone checks and stores it whole.
    const again = await mapAndWait(res.body.upload.id);
    expect(again.status).toBe('checked');
    expect(await stagedRows(res.body.upload.id)).toBe(again.rowsAccepted);
  });

  it('a failure while storing rolls back: no cohort, no version; the checked upload can be stored afterwards, once', async () => {
    const res = await upload(writeCsv('atomic-commit.csv', goodCsv(100)), { label: 'fault injection' });
    const u = await mapAndWait(res.body.upload.id);
    expect(u.status).toBe('checked');
    const before = await snapshot();
    const token = await tokenFor('steward');
    await fault('cohort_versions', "label <> 'fault injection'", async () => {
      const commit = await request(app)
        .post(`/api/uploads/${u.id}/commit`)
        .set(bearer(token))
        .send({ excludeRejected: true });
      expect(commit.status).toBe(500);
      expect(commit.body.error).toMatch(/rolled back: nothing was stored/);
      expect(JSON.stringify(commit.body)).not.toMatch(/plumbline_test_fault|constraint|SELECT|INSERT/i);
    });
    expect(await snapshot()).toEqual(before);
    expect((await request(app).get(`/api/uploads/${u.id}`).set(bearer(token))).body.upload.status).toBe('checked');
    const stored = await request(app)
      .post(`/api/uploads/${u.id}/commit`)
      .set(bearer(token))
      .send({ excludeRejected: true });
    expect(stored.status, JSON.stringify(stored.body)).toBe(201);
    expect(await snapshot()).toEqual({
      ...before,
      cohorts: before.cohorts + 1,
      versions: before.versions + 1,
      rows: before.rows + u.rowsAccepted,
    });
    expect(
      (await request(app).post(`/api/uploads/${u.id}/commit`).set(bearer(token)).send({ excludeRejected: true }))
        .status,
    ).toBe(409);
  });

  it('an upload left unfinished past the keep period is discarded with its staged rows, on the record', async () => {
    const res = await upload(writeCsv('stale.csv', goodCsv(40)));
    const u = await mapAndWait(res.body.upload.id);
    expect(await stagedRows(u.id)).toBe(u.rowsAccepted);
    const fresh = await upload(writeCsv('fresh.csv', goodCsv(10)));
    // The table refuses nothing here: uploads are working records, only stored versions are immutable.
    await dataSource.query(`UPDATE cohort_uploads SET updated_at = now() - interval '15 days' WHERE id = $1`, [u.id]);
    expect(await discardStaleUploads(14)).toBeGreaterThanOrEqual(1);
    const [after] = await dataSource.query('SELECT status, temp_path FROM cohort_uploads WHERE id = $1', [u.id]);
    expect(after).toEqual({ status: 'discarded', temp_path: null });
    expect(await stagedRows(u.id)).toBe(0);
    expect(
      (
        await dataSource.query(
          `SELECT count(*)::int AS n FROM audit_log WHERE action = 'cohort.upload.expired' AND target_id = $1`,
          [u.id],
        )
      )[0].n,
    ).toBe(1);
    const [kept] = await dataSource.query('SELECT status FROM cohort_uploads WHERE id = $1', [fresh.body.upload.id]);
    expect(kept.status).toBe('pending');
  });

  it('discarding a checked upload removes its staged rows; stored rows stay immutable', async () => {
    const res = await upload(writeCsv('discard.csv', goodCsv(50)));
    const u = await mapAndWait(res.body.upload.id);
    expect(await stagedRows(u.id)).toBe(u.rowsAccepted);
    const d = await request(app)
      .post(`/api/uploads/${u.id}/discard`)
      .set(bearer(await tokenFor('steward')))
      .send({});
    expect(d.status, JSON.stringify(d.body)).toBeLessThan(300);
    expect(await stagedRows(u.id)).toBe(0);
  });
});

describe('access by role', () => {
  const writers: Role[] = ['steward', 'statistician'];
  const readers: Role[] = ['steward', 'statistician', 'chair', 'admin'];
  let cohortId = '';
  let uploadId = '';
  beforeAll(async () => {
    const [c] = await dataSource.query('SELECT cohort_id FROM cohort_versions WHERE version = 1 LIMIT 1');
    cohortId = c.cohort_id;
    const res = await upload(writeCsv('roles.csv', goodCsv(5)));
    uploadId = res.body.upload.id;
  });
  const routes = () =>
    [
      { method: 'get', url: '/api/cohorts', allowed: readers },
      { method: 'get', url: `/api/cohorts/${cohortId}`, allowed: readers },
      { method: 'get', url: `/api/cohorts/${cohortId}/versions/1`, allowed: readers },
      { method: 'get', url: `/api/cohorts/${cohortId}/versions/1/rows`, allowed: readers },
      { method: 'get', url: '/api/mappings', allowed: writers },
      { method: 'get', url: '/api/uploads', allowed: writers },
    ] as const;
  it.each(ROLES)('%s: reads what the role may and gets 403 elsewhere', async (role) => {
    const token = await tokenFor(role);
    for (const r of routes()) {
      const res = await request(app)[r.method](r.url).set(bearer(token));
      expect(res.status, `${role} ${r.url}`).toBe((r.allowed as readonly Role[]).includes(role) ? 200 : 403);
    }
    const writes = [
      request(app)
        .post('/api/cohorts')
        .set(bearer(token))
        .field('scoreVersionId', formulaVersionId)
        .field('cohortName', 'r')
        .attach('file', writeCsv(`r-${role}.csv`, goodCsv(3))),
      request(app).post(`/api/uploads/${uploadId}/mapping`).set(bearer(token)).send({ mapping: KESTREL_MAPPING }),
      request(app).get(`/api/uploads/${uploadId}`).set(bearer(token)),
      request(app).get(`/api/uploads/${uploadId}/rejections`).set(bearer(token)),
      request(app).get(`/api/uploads/${uploadId}/rejections.csv`).set(bearer(token)),
      request(app).post(`/api/uploads/${uploadId}/commit`).set(bearer(token)).send({ excludeRejected: true }),
      request(app).post(`/api/uploads/${uploadId}/discard`).set(bearer(token)),
      request(app).post('/api/mappings').set(bearer(token)).send({ name: 'r', mapping: KESTREL_MAPPING }),
    ];
    for (const [i, w] of writes.entries()) {
      const res = await w;
      if (writers.includes(role)) expect(res.status, `${role} write #${i}`).not.toBe(403);
      else expect(res.status, `${role} write #${i}`).toBe(403);
    }
  });
  it('uploads are private to their uploader (another writer gets 404)', async () => {
    const res = await upload(writeCsv('private.csv', goodCsv(3)));
    expect(
      (
        await request(app)
          .get(`/api/uploads/${res.body.upload.id}`)
          .set(bearer(await tokenFor('statistician')))
      ).status,
    ).toBe(404);
    expect(
      (
        await request(app)
          .get(`/api/uploads/${res.body.upload.id}`)
          .set(bearer(await tokenFor('steward')))
      ).status,
    ).toBe(200);
  });
  it('without a token every cohort route answers 401', async () => {
    for (const url of ['/api/cohorts', `/api/cohorts/${cohortId}`, `/api/uploads/${uploadId}`, '/api/mappings']) {
      expect((await request(app).get(url)).status).toBe(401);
    }
    expect((await request(app).post('/api/cohorts')).status).toBe(401);
  });
  it('bad ids are 400', async () => {
    const token = await tokenFor('steward');
    expect((await request(app).get('/api/cohorts/not-a-uuid').set(bearer(token))).status).toBe(400);
    expect((await request(app).get('/api/uploads/not-a-uuid').set(bearer(token))).status).toBe(400);
  });
});
