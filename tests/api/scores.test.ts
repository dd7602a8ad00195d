// Score registry API: who may read and write, what a valid formula is, how versions are numbered, and that a
// version used by a run is frozen — by the API and by the database itself.
import request from 'supertest';
import { beforeAll, describe, expect, it } from 'vitest';
import type { Role } from '@shared/roles';
import { ROLES } from '@shared/roles';
import type { ScoreModel } from '@shared/model';
import {
  KESTREL_SCORE,
  KESTREL_V1_MODEL,
  KESTREL_V2_MODEL,
  seedKestrelScore,
} from '../../server/src/demo/seeds/scenario';
import { lockScoreVersion } from '../../server/src/domain/scores/scores';
import { app, bearer, countRows, dataSource, refusedTwice, tokenFor, useDatabase } from '../helpers/api';

useDatabase();

const READERS: Role[] = ['statistician', 'admin', 'steward', 'chair'];
const WRITERS: Role[] = ['statistician', 'admin'];

let seq = 0;
const uniqueName = (what: string) => `Test ${what} score ${Date.now()}-${++seq}`;

const scoreBody = (name = uniqueName('plain')) => ({
  name,
  outcomeDefinition: 'In-hospital deterioration within 48 hours (test record).',
  timeHorizon: '48 hours',
  intendedPopulation: 'Adults on general wards (test record).',
  citation: 'Invented for the test suite.',
  doi: '10.5555/test.1',
  cautionText: 'Test caution.',
});

const splineModel: ScoreModel = {
  intercept: -2.1,
  predictors: [
    { column: 'age', coefficient: 0.03, transform: 'linear' },
    { column: 'age', coefficient: 0.011, transform: 'rcs', knots: [30, 50, 65, 80], term: 1 },
    { column: 'age', coefficient: -0.02, transform: 'rcs', knots: [30, 50, 65, 80], term: 2 },
    { column: 'lactate', coefficient: 0.4, transform: 'log' },
    { column: 'ward', coefficient: 0.25, transform: 'indicator', level: 'surgical' },
  ],
};

async function as(role: Role) {
  return bearer(await tokenFor(role));
}

async function newScore(role: Role = 'statistician', name?: string) {
  const res = await request(app)
    .post('/api/scores')
    .set(await as(role))
    .send(scoreBody(name));
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  return res.body.score as { id: string; name: string };
}

async function addVersion(scoreId: string, body: unknown, role: Role = 'statistician') {
  return request(app)
    .post(`/api/scores/${scoreId}/versions`)
    .set(await as(role))
    .send(body as object);
}

async function auditFor(targetId: string) {
  return (await dataSource.query(
    'SELECT action, actor_email, details FROM audit_log WHERE target_id = $1 ORDER BY seq',
    [targetId],
  )) as {
    action: string;
    actor_email: string | null;
    details: Record<string, unknown>;
  }[];
}

// A score with version 1, for the read-route matrix.
let fixture: { id: string; name: string };
beforeAll(async () => {
  fixture = await newScore('statistician', uniqueName('fixture'));
  const v = await addVersion(fixture.id, { mode: 'formula', model: splineModel });
  expect(v.status, JSON.stringify(v.body)).toBe(201);
});

describe('read routes: statistician, admin, steward and chair may read; clinicians and anonymous callers may not', () => {
  const paths = () => [
    '/api/scores',
    `/api/scores/${fixture.id}`,
    `/api/scores/${fixture.id}/versions`,
    `/api/scores/${fixture.id}/versions/1`,
    `/api/scores/${fixture.id}/versions/1/export`,
  ];
  for (const role of ROLES) {
    const allowed = READERS.includes(role);
    it(`${role} ${allowed ? 'reads (200)' : 'is refused (403)'} on every registry read route`, async () => {
      for (const path of paths()) {
        const res = await request(app)
          .get(path)
          .set(await as(role));
        expect(res.status, `${role} GET ${path}`).toBe(allowed ? 200 : 403);
      }
    });
  }
  it('asks an anonymous caller to sign in (401)', async () => {
    for (const path of paths()) expect((await request(app).get(path)).status, path).toBe(401);
  });

  it('lists scores with version counts and shows one with its history', async () => {
    const list = await request(app)
      .get('/api/scores')
      .set(await as('chair'));
    const row = list.body.scores.find((s: { id: string }) => s.id === fixture.id);
    expect(row).toMatchObject({ name: fixture.name, versionCount: 1, latestVersion: 1, approvedVersions: [] });
    const one = await request(app)
      .get(`/api/scores/${fixture.id}`)
      .set(await as('steward'));
    expect(one.body.score.doi).toBe('10.5555/test.1');
    expect(one.body.versions).toHaveLength(1);
    expect(one.body.versions[0]).toMatchObject({
      version: 1,
      mode: 'formula',
      locked: false,
      clinicalStatus: 'not approved',
      createdByName: 'Dr. Tomas Ilunga',
    });
    expect(one.body.versions[0].model).toEqual(splineModel);
  });
});

describe('write routes: only statistician and admin', () => {
  for (const role of ROLES) {
    const allowed = WRITERS.includes(role);
    it(`${role} ${allowed ? 'may' : 'may not'} create a score, change it and add a version`, async () => {
      const before = {
        scores: await countRows('scores'),
        versions: await countRows('score_versions'),
        audit: await countRows('audit_log'),
      };
      const created = await request(app)
        .post('/api/scores')
        .set(await as(role))
        .send(scoreBody());
      const patched = await request(app)
        .patch(`/api/scores/${fixture.id}`)
        .set(await as(role))
        .send({ timeHorizon: `48 hours (${role})` });
      const version = await addVersion(
        fixture.id,
        { mode: 'supplied', probabilityColumn: 'vendor_p', changeNote: `supplied by ${role}` },
        role,
      );
      const edit = await request(app)
        .patch(`/api/scores/${fixture.id}/versions/1`)
        .set(await as(role))
        .send({ changeNote: 'x' });
      if (allowed) {
        expect(created.status).toBe(201);
        expect(patched.status).toBe(200);
        expect(patched.body.score.timeHorizon).toBe(`48 hours (${role})`);
        expect(version.status, JSON.stringify(version.body)).toBe(201);
        expect(edit.status).toBe(409);
      } else {
        for (const res of [created, patched, version, edit]) {
          expect(res.status).toBe(403);
          expect(res.body.error).toMatch(/statistician, admin/);
        }
        // A refused request changes nothing, not even the audit trail.
        expect({
          scores: await countRows('scores'),
          versions: await countRows('score_versions'),
          audit: await countRows('audit_log'),
        }).toEqual(before);
      }
    });
  }
  it('refuses anonymous writes (401)', async () => {
    expect((await request(app).post('/api/scores').send(scoreBody())).status).toBe(401);
    expect((await request(app).patch(`/api/scores/${fixture.id}`).send({ timeHorizon: 'x' })).status).toBe(401);
    expect((await addVersionAnon(fixture.id)).status).toBe(401);
  });
});

const addVersionAnon = (id: string) =>
  request(app).post(`/api/scores/${id}/versions`).send({ mode: 'formula', model: splineModel });

describe('validation', () => {
  const bad = (model: unknown) => ({ mode: 'formula', model });
  const cases: [string, unknown, RegExp][] = [
    [
      'an unknown transform',
      bad({ intercept: 0, predictors: [{ column: 'age', coefficient: 1, transform: 'sqrt' }] }),
      /model\.predictors\.0\.transform/,
    ],
    [
      'an indicator without a level',
      bad({ intercept: 0, predictors: [{ column: 'ward', coefficient: 1, transform: 'indicator' }] }),
      /ward: an indicator needs a level/,
    ],
    [
      'spline knots that do not ascend',
      bad({
        intercept: 0,
        predictors: [{ column: 'age', coefficient: 1, transform: 'rcs', knots: [30, 65, 50, 80], term: 1 }],
      }),
      /knots must ascend/,
    ],
    [
      'a spline term without knots',
      bad({ intercept: 0, predictors: [{ column: 'age', coefficient: 1, transform: 'rcs', term: 1 }] }),
      /needs knots and term/,
    ],
    [
      'a spline term beyond knots − 2',
      bad({
        intercept: 0,
        predictors: [{ column: 'age', coefficient: 1, transform: 'rcs', knots: [1, 2, 3], term: 2 }],
      }),
      /term must be at most/,
    ],
    [
      'a coefficient given as text',
      bad({ intercept: 0, predictors: [{ column: 'age', coefficient: '0.1' }] }),
      /coefficient/,
    ],
    ['a missing intercept', bad({ predictors: [] }), /model\.intercept/],
    ['an empty column name', bad({ intercept: 0, predictors: [{ column: ' ', coefficient: 1 }] }), /column/],
    [
      'the same term twice',
      bad({
        intercept: 0,
        predictors: [
          { column: 'age', coefficient: 1 },
          { column: 'age', coefficient: 2 },
        ],
      }),
      /the same term appears twice/,
    ],
    [
      'spline terms of one column with different knots',
      bad({
        intercept: 0,
        predictors: [
          { column: 'age', coefficient: 1, transform: 'rcs', knots: [1, 2, 3, 4], term: 1 },
          { column: 'age', coefficient: 1, transform: 'rcs', knots: [1, 2, 3, 5], term: 2 },
        ],
      }),
      /same knots/,
    ],
    ['an unknown mode', { mode: 'guess', model: splineModel }, /mode/],
    ['a supplied version without its column', { mode: 'supplied' }, /probabilityColumn/],
  ];
  for (const [what, body, message] of cases) {
    it(`refuses ${what} with 400 and stores nothing`, async () => {
      const before = await countRows('score_versions');
      const res = await addVersion(fixture.id, body);
      expect(res.status).toBe(400);
      expect(res.body.error).toMatch(message);
      expect(await countRows('score_versions')).toBe(before);
    });
  }

  it('refuses a non-finite coefficient (1e999 in the JSON text reads as Infinity)', async () => {
    const res = await request(app)
      .post(`/api/scores/${fixture.id}/versions`)
      .set(await as('statistician'))
      .set('Content-Type', 'application/json')
      .send(
        '{"mode":"formula","model":{"intercept":0,"predictors":[{"column":"age","coefficient":1e999}]},"changeNote":"overflow"}',
      );
    expect(res.status).toBe(400);
    expect(res.body.error).toMatch(/model\.predictors\.0\.coefficient/);
  });

  it('requires a change note from version 2 on, but not for version 1', async () => {
    const s = await newScore();
    expect((await addVersion(s.id, { mode: 'formula', model: splineModel })).status).toBe(201);
    const res = await addVersion(s.id, { mode: 'formula', model: splineModel, changeNote: '   ' });
    expect(res.status).toBe(400);
    expect(res.body.error).toMatch(/change note is required for version 2/);
  });

  it('checks score descriptions: required fields, DOI form, nothing-to-change, duplicate names, unknown ids', async () => {
    const st = await as('statistician');
    const missing = await request(app)
      .post('/api/scores')
      .set(st)
      .send({ ...scoreBody(), cautionText: '' });
    expect(missing.status).toBe(400);
    expect(missing.body.error).toMatch(/cautionText/);
    expect(
      (
        await request(app)
          .post('/api/scores')
          .set(st)
          .send({ ...scoreBody(), doi: 'not a doi' })
      ).body.error,
    ).toMatch(/doi/);
    const link = await request(app)
      .post('/api/scores')
      .set(st)
      .send({ ...scoreBody(), doi: 'https://doi.org/10.5555/abc.9' });
    expect(link.body.score.doi).toBe('10.5555/abc.9');
    expect((await request(app).patch(`/api/scores/${fixture.id}`).set(st).send({})).status).toBe(400);
    const dup = await request(app).post('/api/scores').set(st).send(scoreBody(fixture.name));
    expect(dup.status).toBe(409);
    expect(dup.body.error).toMatch(/already exists/);
    const unknown = '00000000-0000-4000-8000-000000000000';
    expect((await request(app).get(`/api/scores/${unknown}`).set(st)).status).toBe(404);
    expect((await addVersion(unknown, { mode: 'formula', model: splineModel })).status).toBe(404);
    expect((await request(app).get(`/api/scores/${fixture.id}/versions/99`).set(st)).status).toBe(404);
    expect((await request(app).get(`/api/scores/not-a-uuid`).set(st)).status).toBe(400);
    expect((await request(app).get(`/api/scores/${fixture.id}/versions/0`).set(st)).status).toBe(400);
    expect((await request(app).get(`/api/scores/${fixture.id}/versions/one`).set(st)).status).toBe(400);
  });
});

describe('version numbering', () => {
  it('numbers versions 1, 2, 3 … in order, newest first in the history', async () => {
    const s = await newScore();
    for (let i = 1; i <= 3; i++) {
      const res = await addVersion(s.id, {
        mode: 'formula',
        model: { ...splineModel, intercept: -i },
        changeNote: `step ${i}`,
      });
      expect(res.status).toBe(201);
      expect(res.body.version.version).toBe(i);
      expect(res.headers.location).toBe(`/api/scores/${s.id}/versions/${i}`);
    }
    const hist = await request(app)
      .get(`/api/scores/${s.id}/versions`)
      .set(await as('chair'));
    expect(hist.body.versions.map((v: { version: number }) => v.version)).toEqual([3, 2, 1]);
    expect(hist.body.versions[0].model.intercept).toBe(-3);
  });

  it('gives concurrent requests distinct consecutive numbers (row lock on the score)', async () => {
    const s = await newScore();
    expect((await addVersion(s.id, { mode: 'formula', model: splineModel })).status).toBe(201);
    const st = await as('statistician');
    const results = await Promise.all(
      Array.from({ length: 6 }, (_, i) =>
        request(app)
          .post(`/api/scores/${s.id}/versions`)
          .set(st)
          .send({ mode: 'formula', model: { ...splineModel, intercept: i }, changeNote: `parallel ${i}` }),
      ),
    );
    expect(results.map((r) => r.status)).toEqual(Array(6).fill(201));
    expect(results.map((r) => r.body.version.version).sort((a, b) => a - b)).toEqual([2, 3, 4, 5, 6, 7]);
  });
});

describe('a version used by a run is frozen', () => {
  let score: { id: string };
  let versionId: string;
  beforeAll(async () => {
    score = await newScore();
    const res = await addVersion(score.id, { mode: 'formula', model: splineModel });
    versionId = res.body.version.id;
    await dataSource.transaction((m) => lockScoreVersion(versionId, m));
  });

  it('shows the lock and refuses an edit through the API with 409 that says to create a new version', async () => {
    const v = await request(app)
      .get(`/api/scores/${score.id}/versions/1`)
      .set(await as('steward'));
    expect(v.body.version.locked).toBe(true);
    const res = await request(app)
      .patch(`/api/scores/${score.id}/versions/1`)
      .set(await as('statistician'))
      .send({ model: { intercept: 0, predictors: [] } });
    expect(res.status).toBe(409);
    expect(res.body.error).toMatch(
      /used by a validation run and is frozen; create a new version instead \(it will be version 2/,
    );
    expect(res.body.details).toEqual({ locked: true, nextVersion: 2 });
  });

  it('refuses an edit of an unlocked version too: versions are never edited in place', async () => {
    const res = await addVersion(score.id, { mode: 'formula', model: splineModel, changeNote: 'draft' });
    expect(res.body.version.locked).toBe(false);
    const edit = await request(app)
      .patch(`/api/scores/${score.id}/versions/2`)
      .set(await as('admin'))
      .send({ changeNote: 'edited' });
    expect(edit.status).toBe(409);
    expect(edit.body.error).toMatch(/never edited in place; create a new version instead \(it will be version 3/);
  });

  it('is refused by the database trigger even by direct SQL', async () => {
    await expect(
      dataSource.query(`UPDATE score_versions SET model = '{"intercept":0,"predictors":[]}'::jsonb WHERE id = $1`, [
        versionId,
      ]),
    ).rejects.toThrow(/is used by a run and is immutable; create a new version/);
    await expect(
      dataSource.query(`UPDATE score_versions SET mode = 'supplied', probability_column = 'p' WHERE id = $1`, [
        versionId,
      ]),
    ).rejects.toThrow(/immutable/);
    await expect(
      dataSource.query(`UPDATE score_versions SET locked = false WHERE id = $1`, [versionId]),
    ).rejects.toThrow(/immutable/);
    await expect(dataSource.query(`UPDATE score_versions SET version = 9 WHERE id = $1`, [versionId])).rejects.toThrow(
      /immutable/,
    );
    await refusedTwice(`DELETE FROM score_versions WHERE id = $1`, [versionId], /cannot be deleted/);
    const [row] = await dataSource.query('SELECT model, locked FROM score_versions WHERE id = $1', [versionId]);
    expect(row).toEqual({ model: splineModel, locked: true });
  });

  it('still lets the sign-off change the clinical status of a frozen version (rolled back here)', async () => {
    const qr = dataSource.createQueryRunner();
    await qr.connect();
    await qr.startTransaction();
    try {
      await qr.query(`UPDATE score_versions SET clinical_status = 'approved' WHERE id = $1`, [versionId]);
      const [row] = await qr.query('SELECT clinical_status FROM score_versions WHERE id = $1', [versionId]);
      expect(row.clinical_status).toBe('approved');
    } finally {
      await qr.rollbackTransaction();
      await qr.release();
    }
  });

  it('locks once: a second lock is a no-op and writes one audit entry in all', async () => {
    await dataSource.transaction((m) => lockScoreVersion(versionId, m));
    const entries = (await auditFor(versionId)).filter((e) => e.action === 'score_version.lock');
    expect(entries).toHaveLength(1);
    expect(entries[0].details).toMatchObject({ scoreId: score.id, version: 1 });
  });
});

describe('audit trail', () => {
  it('records creating and changing a score and adding a version, with who and what', async () => {
    const s = await newScore('admin');
    await request(app)
      .patch(`/api/scores/${s.id}`)
      .set(await as('statistician'))
      .send({ cautionText: 'New caution.', timeHorizon: '48 hours' });
    const v = await addVersion(s.id, { mode: 'supplied', probabilityColumn: 'vendor_p', changeNote: 'vendor score' });
    const scoreEntries = await auditFor(s.id);
    expect(scoreEntries.map((e) => e.action)).toEqual(['score.create', 'score.update']);
    expect(scoreEntries[0].actor_email).toBe('admin@demo.test');
    // Only the fields that changed are recorded (the time horizon was already 48 hours).
    expect(scoreEntries[1]).toMatchObject({
      actor_email: 'statistician@demo.test',
      details: { before: { cautionText: 'Test caution.' }, after: { cautionText: 'New caution.' } },
    });
    const versionEntries = await auditFor(v.body.version.id);
    expect(versionEntries).toHaveLength(1);
    expect(versionEntries[0]).toMatchObject({
      action: 'score_version.create',
      details: { scoreId: s.id, version: 1, mode: 'supplied' },
    });
    const chain = await request(app)
      .get('/api/audit/verify')
      .set(await as('admin'));
    expect(chain.body.ok).toBe(true);
  });
});

describe('export and import of the --model JSON', () => {
  it('exports a download that imports back as the next version with the same formula', async () => {
    const s = await newScore();
    expect((await addVersion(s.id, { mode: 'formula', model: splineModel })).status).toBe(201);
    const exp = await request(app)
      .get(`/api/scores/${s.id}/versions/1/export`)
      .set(await as('chair'));
    expect(exp.status).toBe(200);
    expect(exp.headers['content-type']).toMatch(/application\/json/);
    const slug = s.name.toLowerCase().replace(/[^a-z0-9]+/g, '-');
    // content-disposition (RFC 6266) may give the name as a token or quoted.
    expect(exp.headers['content-disposition']).toMatch(
      new RegExp(`^attachment; filename="?${slug}-v1\\.model\\.json"?$`),
    );
    const file = JSON.parse(exp.text);
    expect(Object.keys(file).sort()).toEqual(['intercept', 'predictors']);
    expect(file).toEqual(splineModel);

    // The file as it is, plus the note, is a valid request body (mode is implied).
    const imported = await addVersion(s.id, { ...file, changeNote: 'Re-imported from the exported file' });
    expect(imported.status, JSON.stringify(imported.body)).toBe(201);
    expect(imported.body.version).toMatchObject({ version: 2, mode: 'formula' });
    const back = await request(app)
      .get(`/api/scores/${s.id}/versions/2`)
      .set(await as('statistician'));
    expect(back.body.version.model).toEqual(file);
  });

  it('reads a missing transform in an imported file as linear', async () => {
    const s = await newScore();
    const res = await addVersion(s.id, { intercept: -1, predictors: [{ column: 'age', coefficient: 0.02 }] });
    expect(res.status).toBe(201);
    expect(res.body.version.model.predictors[0]).toEqual({ column: 'age', coefficient: 0.02, transform: 'linear' });
  });

  it('has nothing to export for a supplied-probability version (409)', async () => {
    const s = await newScore();
    await addVersion(s.id, { mode: 'supplied', probabilityColumn: 'vendor_p' });
    const res = await request(app)
      .get(`/api/scores/${s.id}/versions/1/export`)
      .set(await as('statistician'));
    expect(res.status).toBe(409);
    expect(res.body.error).toMatch(/supplied probability column \(vendor_p\)/);
  });
});

describe('demo seed', () => {
  it('registers the invented Kestrel score with versions 1 and 2, and a second run changes nothing', async () => {
    const first = await seedKestrelScore();
    const audit = await countRows('audit_log');
    const second = await seedKestrelScore();
    expect(second.id).toBe(first.id);
    expect(await countRows('audit_log')).toBe(audit);
    const res = await request(app)
      .get(`/api/scores/${first.id}`)
      .set(await as('steward'));
    expect(res.body.score.name).toBe(KESTREL_SCORE.name);
    expect(res.body.score.citation).toMatch(/fictional citation for the demo/);
    const versions = res.body.versions as { version: number; model: ScoreModel; changeNote: string }[];
    expect(versions.map((v) => v.version)).toEqual([2, 1]);
    expect(versions[1].model).toEqual(KESTREL_V1_MODEL);
    expect(versions[0].model).toEqual(KESTREL_V2_MODEL);
    expect(versions[0].model.predictors.find((p) => p.column === 'prior_admissions')!.coefficient).toBe(0.26);
    expect(versions[0].changeNote).toMatch(/prior_admissions/);
  });
});
