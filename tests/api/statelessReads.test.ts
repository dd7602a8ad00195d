// Stateless API processes: every read goes through Express's one chain and reads PostgreSQL, so a change shows on the
// very next read however it was made — through this process, through another API process, or straight in the
// database (simulated here with SQL, which is what another process's committed change looks like to this one).
// Common practice, no source: the rules tested are the project's own (no stale governance data, refusals at once).
import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { ScoreCardView } from '@shared/governance';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { whenProcessed } from '../../server/src/domain/cohorts/uploads';
import { app, bearer, dataSource, DEMO_PASSWORD, loginAs, tokenFor, uniqueEmail, useDatabase } from '../helpers/api';
import { createCohortFixture, createScoreFixture, kestrelRows, type ScoreFixture } from '../helpers/fixtures';

useDatabase();

const as = async (role: Parameters<typeof tokenFor>[0]) => bearer(await tokenFor(role));
const tag = createHash('sha256')
  .update(String(Date.now() + Math.random()))
  .digest('hex')
  .slice(0, 8);

/** A completed run with invented figures (inserted directly, as governance.test.ts does: these tests are about records). */
async function insertCompletedRun(
  scoreVersionId: string,
  cohortVersionId: string,
  createdBy: string | null,
): Promise<string> {
  const results = {
    overall: {
      engineVersion: 'test-fixture',
      n: 400,
      events: 60,
      nonEvents: 340,
      eventRate: 0.15,
      auc: { estimate: 0.71, lower: 0.66, upper: 0.76, se: 0.025 },
      calibrationIntercept: { converged: true, estimate: 0.2, lower: 0.05, upper: 0.35, se: 0.08 },
      calibrationSlope: { converged: true, estimate: 0.93, lower: 0.78, upper: 1.08, se: 0.08, intercept: 0.1 },
      oe: { estimate: 1.18, lower: 1.04, upper: 1.33, observed: 60, expected: 60 / 1.18, method: 'fixture' },
      thresholds: [],
      warnings: [],
    },
    subgroups: [],
    periods: [],
    minSubgroupEvents: 10,
  };
  const sha = (s: string) => createHash('sha256').update(s).digest('hex');
  const rows: { id: string }[] = await dataSource.query(
    `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, results, engine_version, inputs_sha256, results_sha256, finished_at, created_by)
     VALUES ($1, $2, '{}'::jsonb, 'completed', 1, $3::jsonb, 'test-fixture', $4, $5, now(), $6) RETURNING id`,
    [
      scoreVersionId,
      cohortVersionId,
      JSON.stringify(results),
      sha(`in ${tag} ${Math.random()}`),
      sha(`out ${tag} ${Math.random()}`),
      createdBy,
    ],
  );
  return rows[0].id;
}

async function createAccount(role: string, name: string): Promise<{ id: string; email: string; token: string }> {
  const email = uniqueEmail(`stateless-${role}`);
  const res = await request(app)
    .post('/api/users')
    .set(await as('admin'))
    .send({ email, name, role, password: DEMO_PASSWORD });
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  return { id: res.body.id ?? res.body.user?.id, email, token: await loginAs(email) };
}

let score: ScoreFixture;
let cohortVersionId: string;
let creator: { id: string; email: string; token: string };
let runId: string;
const runPath = () => `/api/runs/${runId}`;
const tmp = mkdtempSync(path.join(tmpdir(), `plumbline-stateless-${tag}-`));

beforeAll(async () => {
  score = await createScoreFixture({ name: `Stateless score ${tag}` });
  const cohort = await createCohortFixture(kestrelRows(50, 3), { label: `Stateless cohort ${tag}` });
  cohortVersionId = cohort.cohortVersionId;
  creator = await createAccount('statistician', `Stateless Creator ${tag}`);
  runId = await insertCompletedRun(score.scoreVersionId, cohortVersionId, creator.id);
});

afterAll(() => rmSync(tmp, { recursive: true, force: true }));

describe('HTTP caching of API answers', () => {
  it('says no-store, and answers a matching If-None-Match with 304 and no body', async () => {
    const h = await as('admin');
    const first = await request(app).get(runPath()).set(h);
    expect(first.status).toBe(200);
    expect(first.headers['cache-control']).toBe('no-store');
    expect(first.headers.etag).toMatch(/^W\/"/);
    expect(first.headers['content-security-policy']).toMatch(/default-src 'self'/);
    const again = await request(app)
      .get(runPath())
      .set({ ...h, 'If-None-Match': first.headers.etag });
    expect(again.status).toBe(304);
    expect(again.text ?? '').toBe('');
    const other = await request(app)
      .get(runPath())
      .set({ ...h, 'If-None-Match': 'W/"0-stale"' });
    expect(other.status).toBe(200);
    expect(other.text).toBe(first.text);
  });

  it('answers the old ETag with the new page once what it shows has changed elsewhere', async () => {
    const h = await as('admin');
    const before = await request(app).get(runPath()).set(h);
    expect(
      (
        await request(app)
          .get(runPath())
          .set({ ...h, 'If-None-Match': before.headers.etag })
      ).status,
    ).toBe(304);
    await dataSource.query('UPDATE users SET name = $2 WHERE id = $1', [creator.id, `ETag Creator ${tag}`]);
    const after = await request(app)
      .get(runPath())
      .set({ ...h, 'If-None-Match': before.headers.etag });
    expect(after.status).toBe(200);
    expect(after.headers.etag).not.toBe(before.headers.etag);
    expect(after.body.run.createdByName).toBe(`ETag Creator ${tag}`);
  });
});

describe('a change shows on the very next read', () => {
  it('run page: a creator renamed through the API, then straight in the database', async () => {
    const h = await as('admin');
    expect((await request(app).get(runPath()).set(h)).body.run.createdByName).toMatch(new RegExp(`Creator ${tag}$`));
    const renamed = await request(app)
      .patch(`/api/users/${creator.id}`)
      .set(h)
      .send({ name: `Renamed Creator ${tag}` });
    expect(renamed.status, JSON.stringify(renamed.body)).toBe(200);
    expect((await request(app).get(runPath()).set(h)).body.run.createdByName).toBe(`Renamed Creator ${tag}`);
    await dataSource.query('UPDATE users SET name = $2 WHERE id = $1', [creator.id, `Elsewhere Creator ${tag}`]);
    expect((await request(app).get(runPath()).set(h)).body.run.createdByName).toBe(`Elsewhere Creator ${tag}`);
  });

  it('run page: a score renamed straight in the database', async () => {
    const h = await as('admin');
    await request(app).get(runPath()).set(h);
    await dataSource.query('UPDATE scores SET name = $2 WHERE id = $1', [
      score.scoreId,
      `Stateless score ${tag} renamed`,
    ]);
    expect((await request(app).get(runPath()).set(h)).body.run.scoreName).toBe(`Stateless score ${tag} renamed`);
  });

  it('score cards: a review and sign-off add the card; a revoke removes it', async () => {
    const clinician = await as('clinician');
    const cardOf = async () =>
      ((await request(app).get('/api/scorecards').set(clinician)).body as ScoreCardView[]).find(
        (c) => c.scoreVersionId === score.scoreVersionId,
      );
    expect(await cardOf()).toBeUndefined();
    const review = await request(app)
      .post(`/api/runs/${runId}/review`)
      .set(await as('statistician'))
      .send({ verdict: 'fit for use', reasoning: 'stateless test review' });
    expect(review.status, JSON.stringify(review.body)).toBe(201);
    expect(await cardOf()).toBeUndefined(); // reviewed is not approved
    const signed = await request(app)
      .post(`/api/runs/${runId}/signoff`)
      .set(await as('chair'))
      .send({ decision: 'approve', password: DEMO_PASSWORD });
    expect(signed.status, JSON.stringify(signed.body)).toBe(201);
    expect((await cardOf())?.validation?.runId).toBe(runId);
    const revoked = await request(app)
      .post(`/api/score-versions/${score.scoreVersionId}/revoke`)
      .set(await as('chair'))
      .send({ password: DEMO_PASSWORD, reason: 'stateless test revoke' });
    expect(revoked.status, JSON.stringify(revoked.body)).toBe(201);
    expect(await cardOf()).toBeUndefined();
  });

  it('cohort list: a stored upload shows at once (POST /api/uploads/:id/commit)', async () => {
    const steward = await as('steward');
    const name = `Stateless upload ${tag}`;
    const listed = async () =>
      (
        await request(app)
          .get(`/api/cohorts?search=${encodeURIComponent(name)}`)
          .set(steward)
      ).body.cohorts as { name: string; versions: number }[];
    expect(await listed()).toEqual([]);
    const all = (await request(app).get('/api/cohorts?pageSize=100').set(steward)).body.total as number;
    const file = path.join(tmp, 'upload.csv');
    writeFileSync(
      file,
      `${[...kestrelQuarterCsv({ year: 2025, quarter: 3, index: 6, n: 60, seed: 11 })].join('\n')}\n`,
    );
    const versions = await request(app).get('/api/upload-score-versions').set(steward);
    const sv = (versions.body.scoreVersions as { id: string; mode: string }[]).find((v) => v.mode === 'formula');
    const created = await request(app)
      .post('/api/cohorts')
      .set(steward)
      .field('scoreVersionId', sv!.id)
      .field('cohortName', name)
      .attach('file', file);
    expect(created.status, JSON.stringify(created.body)).toBe(201);
    const id = created.body.upload.id as string;
    expect(
      (await request(app).post(`/api/uploads/${id}/mapping`).set(steward).send({ mapping: KESTREL_MAPPING })).status,
    ).toBe(202);
    await whenProcessed(id);
    expect(await listed()).toEqual([]); // checked, not stored yet
    const commit = await request(app).post(`/api/uploads/${id}/commit`).set(steward).send({ excludeRejected: true });
    expect(commit.status, JSON.stringify(commit.body)).toBe(201);
    expect((await listed()).map((c) => [c.name, c.versions])).toEqual([[name, 1]]);
    expect((await request(app).get('/api/cohorts?pageSize=100').set(steward)).body.total).toBe(all + 1);
  });
});

describe('account changes bite at once', () => {
  it('a deactivation made straight in the database is refused on the next request, with no grace period', async () => {
    const acct = await createAccount('statistician', `Stateless Direct ${tag}`);
    expect((await request(app).get(runPath()).set(bearer(acct.token))).status).toBe(200);
    await dataSource.query('UPDATE users SET active = false WHERE id = $1', [acct.id]);
    expect((await request(app).get(runPath()).set(bearer(acct.token))).status).toBe(401);
    expect((await request(app).get('/api/cohorts').set(bearer(acct.token))).status).toBe(401);
    await dataSource.query('UPDATE users SET active = true WHERE id = $1', [acct.id]);
    expect((await request(app).get(runPath()).set(bearer(acct.token))).status).toBe(200);
  });

  it('a deactivation through the API is refused on the next request; the old token stays refused after reactivation', async () => {
    const acct = await createAccount('statistician', `Stateless Deactivated ${tag}`);
    expect((await request(app).get(runPath()).set(bearer(acct.token))).status).toBe(200);
    expect(
      (
        await request(app)
          .patch(`/api/users/${acct.id}`)
          .set(await as('admin'))
          .send({ active: false })
      ).status,
    ).toBe(200);
    expect((await request(app).get(runPath()).set(bearer(acct.token))).status).toBe(401);
    expect(
      (
        await request(app)
          .patch(`/api/users/${acct.id}`)
          .set(await as('admin'))
          .send({ active: true })
      ).status,
    ).toBe(200);
    expect((await request(app).get(runPath()).set(bearer(acct.token))).status).toBe(401);
    expect(
      (
        await request(app)
          .get(runPath())
          .set(bearer(await loginAs(acct.email)))
      ).status,
    ).toBe(200);
  });

  it('a role change made straight in the database refuses the old token at once', async () => {
    const acct = await createAccount('chair', `Stateless Role ${tag}`);
    expect((await request(app).get('/api/scorecards').set(bearer(acct.token))).status).toBe(200);
    await dataSource.query(`UPDATE users SET role = 'steward' WHERE id = $1`, [acct.id]);
    expect((await request(app).get('/api/scorecards').set(bearer(acct.token))).status).toBe(401);
  });

  it('a password reset refuses the old token at once', async () => {
    const acct = await createAccount('steward', `Stateless Reset ${tag}`);
    expect((await request(app).get('/api/cohorts').set(bearer(acct.token))).status).toBe(200);
    expect(
      (
        await request(app)
          .post(`/api/users/${acct.id}/password`)
          .set(await as('admin'))
          .send({ newPassword: 'another-long-password-1' })
      ).status,
    ).toBe(204);
    expect((await request(app).get('/api/cohorts').set(bearer(acct.token))).status).toBe(401);
  });
});
