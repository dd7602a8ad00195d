// Kept read answers (services/responseCache.ts, routes/define.ts keptAnswers) and kept sign-in checks
// (middleware/auth.ts): after every state-changing request that changes what a kept answer shows, the next read shows
// the change; a kept answer is sent with the same bytes and headers the full Express chain sends; and refusals,
// conditional requests and unusual paths still get the full chain's answers.
// Common practice, no source: the rules tested are the project's own (no stale governance data, exact invalidation).
import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import type { ScoreCardView } from '@shared/governance';
import { KESTREL_MAPPING } from '../../server/src/db/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/db/seeds/kestrelData';
import { completedRunPages } from '../../server/src/routes/runs';
import { scoreCardList } from '../../server/src/routes/governance';
import { whenProcessed } from '../../server/src/services/uploads';
import { app, bearer, dataSource, DEMO_PASSWORD, loginAs, tokenFor, uniqueEmail, useDatabase } from '../helpers/api';
import { createCohortFixture, createScoreFixture, kestrelRows, type ScoreFixture } from '../helpers/fixtures';

useDatabase();

const as = async (role: Parameters<typeof tokenFor>[0]) => bearer(await tokenFor(role));
const tag = createHash('sha256').update(String(Date.now() + Math.random())).digest('hex').slice(0, 8);

/** A completed run with invented figures (inserted directly, as governance.test.ts does: these tests are about records). */
async function insertCompletedRun(scoreVersionId: string, cohortVersionId: string, createdBy: string | null): Promise<string> {
  const results = {
    overall: {
      engineVersion: 'test-fixture', n: 400, events: 60, nonEvents: 340, eventRate: 0.15,
      auc: { estimate: 0.71, lower: 0.66, upper: 0.76, se: 0.025 },
      calibrationIntercept: { converged: true, estimate: 0.2, lower: 0.05, upper: 0.35, se: 0.08 },
      calibrationSlope: { converged: true, estimate: 0.93, lower: 0.78, upper: 1.08, se: 0.08, intercept: 0.1 },
      oe: { estimate: 1.18, lower: 1.04, upper: 1.33, observed: 60, expected: 60 / 1.18, method: 'fixture' },
      thresholds: [], warnings: [],
    },
    subgroups: [], periods: [], minSubgroupEvents: 10,
  };
  const sha = (s: string) => createHash('sha256').update(s).digest('hex');
  const rows: { id: string }[] = await dataSource.query(
    `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, results, engine_version, inputs_sha256, results_sha256, finished_at, created_by)
     VALUES ($1, $2, '{}'::jsonb, 'completed', 1, $3::jsonb, 'test-fixture', $4, $5, now(), $6) RETURNING id`,
    [scoreVersionId, cohortVersionId, JSON.stringify(results), sha(`in ${tag} ${Math.random()}`), sha(`out ${tag} ${Math.random()}`), createdBy],
  );
  return rows[0].id;
}

async function createAccount(role: string, name: string): Promise<{ id: string; email: string; token: string }> {
  const email = uniqueEmail(`kept-${role}`);
  const res = await request(app).post('/api/users').set(await as('admin')).send({ email, name, role, password: DEMO_PASSWORD });
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  return { id: res.body.id ?? res.body.user?.id, email, token: await loginAs(email) };
}

/** Reads a path twice (the second answer comes from what the first kept) and checks both are the same answer. */
async function readTwice(path: string, headers: Record<string, string>) {
  const first = await request(app).get(path).set(headers);
  const second = await request(app).get(path).set(headers);
  expect(second.status).toBe(first.status);
  expect(second.text).toBe(first.text);
  return second;
}

let score: ScoreFixture;
let cohortVersionId: string;
let creator: { id: string; email: string; token: string };
let runId: string;
const tmp = mkdtempSync(path.join(tmpdir(), `plumbline-kept-answers-${tag}-`));

beforeAll(async () => {
  score = await createScoreFixture({ name: `Kept answers score ${tag}` });
  const cohort = await createCohortFixture(kestrelRows(50, 3), { label: `Kept answers cohort ${tag}` });
  cohortVersionId = cohort.cohortVersionId;
  creator = await createAccount('statistician', `Kept Creator ${tag}`);
  runId = await insertCompletedRun(score.scoreVersionId, cohortVersionId, creator.id);
});

afterAll(() => rmSync(tmp, { recursive: true, force: true }));

describe('a kept answer is the same answer', () => {
  it('sends the same bytes and headers as the full chain (security headers, type, ETag)', async () => {
    const h = await as('admin');
    for (const url of [`/api/runs/${runId}`, '/api/scorecards', '/api/cohorts', '/api/cohorts?pageSize=5&sortBy=name&sortDir=asc']) {
      const first = await request(app).get(url).set(h);
      const second = await request(app).get(url).set(h);
      expect(first.status, url).toBe(200);
      expect(second.text, url).toBe(first.text);
      const strip = (x: Record<string, string>) => Object.fromEntries(Object.entries(x).filter(([k]) => k !== 'date'));
      expect(strip(second.headers), url).toEqual(strip(first.headers));
      expect(second.headers['content-security-policy']).toMatch(/default-src 'self'/);
      expect(second.headers['content-type']).toBe('application/json; charset=utf-8');
    }
    // The second reads were answered from what the first kept.
    expect(completedRunPages.peek(runId)).toBeDefined();
    expect(scoreCardList.peek('all')).toBeDefined();
  });

  it('answers If-None-Match with 304 and the same ETag', async () => {
    const h = await as('admin');
    const first = await readTwice(`/api/runs/${runId}`, h);
    const etag = first.headers.etag;
    expect(etag).toMatch(/^W\/"/);
    const again = await request(app).get(`/api/runs/${runId}`).set({ ...h, 'If-None-Match': etag });
    expect(again.status).toBe(304);
    expect(again.text ?? '').toBe('');
  });

  it('still refuses with the usual words: no token, bad token, wrong role, bad id', async () => {
    const url = `/api/runs/${runId}`;
    await readTwice(url, await as('admin'));
    const none = await request(app).get(url);
    expect(none.status).toBe(401);
    expect(none.body.error).toMatch(/sign in required/);
    expect((await request(app).get(url).set(bearer('not.a.token'))).status).toBe(401);
    const clinician = await request(app).get(url).set(await as('clinician'));
    expect(clinician.status).toBe(403);
    expect(clinician.body.error).toMatch(/needs one of the roles/);
    await readTwice('/api/scorecards', await as('admin'));
    expect((await request(app).get('/api/scorecards').set(await as('steward'))).status).toBe(403);
    expect((await request(app).get('/api/runs/not-a-uuid').set(await as('admin'))).status).toBe(400);
    expect((await request(app).get('/api/cohorts?sortBy=nonsense').set(await as('admin'))).status).toBe(400);
  });

  it('gives the full chain\'s answer for other spellings of the same path', async () => {
    const h = await as('admin');
    const plain = await readTwice(`/api/runs/${runId}`, h);
    for (const url of [`/api/runs/${runId}/`, `/API/Runs/${runId}`, `/api/runs/${runId.toUpperCase()}`]) {
      const res = await request(app).get(url).set(h);
      expect(res.status, url).toBe(200);
      expect(res.body.run.id.toLowerCase(), url).toBe(plain.body.run.id);
    }
    // Literal routes before /:id keep their meaning.
    expect((await request(app).get('/api/runs/options').set(await as('steward'))).body).toHaveProperty('scoreVersions');
  });
});

describe('a kept answer is never shown after a change', () => {
  it('run page: the creator’s new name shows at once (PATCH /api/users/:id)', async () => {
    const h = await as('admin');
    expect((await readTwice(`/api/runs/${runId}`, h)).body.run.createdByName).toBe(`Kept Creator ${tag}`);
    const renamed = await request(app).patch(`/api/users/${creator.id}`).set(h).send({ name: `Renamed Creator ${tag}` });
    expect(renamed.status, JSON.stringify(renamed.body)).toBe(200);
    expect((await readTwice(`/api/runs/${runId}`, h)).body.run.createdByName).toBe(`Renamed Creator ${tag}`);
  });

  it('run page: the score’s new name shows at once (PATCH /api/scores/:id)', async () => {
    const h = await as('admin');
    await readTwice(`/api/runs/${runId}`, h);
    const res = await request(app).patch(`/api/scores/${score.scoreId}`).set(await as('statistician')).send({ name: `Kept answers score ${tag} renamed` });
    expect(res.status, JSON.stringify(res.body)).toBe(200);
    expect((await readTwice(`/api/runs/${runId}`, h)).body.run.scoreName).toBe(`Kept answers score ${tag} renamed`);
  });

  it('run page: a run that is not completed is never kept (its progress shows as it changes)', async () => {
    const rows: { id: string }[] = await dataSource.query(
      `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, progress_message)
       VALUES ($1, $2, '{}'::jsonb, 'running', 0.1, 'first step') RETURNING id`,
      [score.scoreVersionId, cohortVersionId],
    );
    const id = rows[0].id;
    try {
      const h = await as('admin');
      expect((await readTwice(`/api/runs/${id}`, h)).body.run.progressMessage).toBe('first step');
      // A change no request made (the run queue's own progress write): seen at once, because nothing was kept.
      await dataSource.query(`UPDATE validation_runs SET progress = 0.5, progress_message = 'half way' WHERE id = $1`, [id]);
      expect((await request(app).get(`/api/runs/${id}`).set(h)).body.run.progressMessage).toBe('half way');
    } finally {
      await dataSource.query(`UPDATE validation_runs SET status = 'failed', error = 'test fixture', finished_at = now() WHERE id = $1`, [id]);
    }
  });

  it('score cards: a review and sign-off add the card; a revoke removes it', async () => {
    const clinician = await as('clinician');
    const cardOf = async () => ((await readTwice('/api/scorecards', clinician)).body as ScoreCardView[]).find((c) => c.scoreVersionId === score.scoreVersionId);
    expect(await cardOf()).toBeUndefined();

    const review = await request(app).post(`/api/runs/${runId}/review`).set(await as('statistician')).send({ verdict: 'fit for use', reasoning: 'kept-answers test review' });
    expect(review.status, JSON.stringify(review.body)).toBe(201);
    expect(await cardOf()).toBeUndefined(); // reviewed is not approved
    const signed = await request(app).post(`/api/runs/${runId}/signoff`).set(await as('chair')).send({ decision: 'approve', password: DEMO_PASSWORD });
    expect(signed.status, JSON.stringify(signed.body)).toBe(201);
    const card = await cardOf();
    expect(card?.validation?.runId).toBe(runId);
    expect(card?.approval?.role).toBe('chair');

    const revoked = await request(app).post(`/api/score-versions/${score.scoreVersionId}/revoke`).set(await as('chair')).send({ password: DEMO_PASSWORD, reason: 'kept-answers test revoke' });
    expect(revoked.status, JSON.stringify(revoked.body)).toBe(201);
    expect(await cardOf()).toBeUndefined();
  });

  it('cohort list: a stored upload shows at once (POST /api/uploads/:id/commit)', async () => {
    const steward = await as('steward');
    const name = `Kept answers upload ${tag}`;
    const listed = async () => ((await readTwice(`/api/cohorts?search=${encodeURIComponent(name)}`, steward)).body.cohorts as { name: string; versions: number }[]);
    expect(await listed()).toEqual([]);
    const all = (await readTwice('/api/cohorts?pageSize=100', steward)).body.total as number;

    const file = path.join(tmp, 'upload.csv');
    writeFileSync(file, `${[...kestrelQuarterCsv({ year: 2025, quarter: 3, index: 6, n: 60, seed: 11 })].join('\n')}\n`);
    const versions = await request(app).get('/api/upload-score-versions').set(steward);
    const sv = (versions.body.scoreVersions as { id: string; mode: string }[]).find((v) => v.mode === 'formula');
    const created = await request(app).post('/api/cohorts').set(steward).field('scoreVersionId', sv!.id).field('cohortName', name).attach('file', file);
    expect(created.status, JSON.stringify(created.body)).toBe(201);
    const id = created.body.upload.id as string;
    expect((await request(app).post(`/api/uploads/${id}/mapping`).set(steward).send({ mapping: KESTREL_MAPPING })).status).toBe(202);
    await whenProcessed(id);
    expect(await listed()).toEqual([]); // checked, not stored yet
    const commit = await request(app).post(`/api/uploads/${id}/commit`).set(steward).send({ excludeRejected: true });
    expect(commit.status, JSON.stringify(commit.body)).toBe(201);

    expect((await listed()).map((c) => [c.name, c.versions])).toEqual([[name, 1]]);
    expect((await readTwice('/api/cohorts?pageSize=100', steward)).body.total).toBe(all + 1);
  });
});

describe('kept sign-in checks follow account changes at once', () => {
  const runPath = () => `/api/runs/${runId}`;

  it('a deactivated account is refused on its next read, and a reactivated one needs a new sign-in only if its token was revoked', async () => {
    const acct = await createAccount('statistician', `Kept Deactivated ${tag}`);
    await readTwice(runPath(), bearer(acct.token));
    expect((await request(app).patch(`/api/users/${acct.id}`).set(await as('admin')).send({ active: false })).status).toBe(200);
    expect((await request(app).get(runPath()).set(bearer(acct.token))).status).toBe(401);
    expect((await request(app).get('/api/cohorts').set(bearer(acct.token))).status).toBe(401);
    expect((await request(app).patch(`/api/users/${acct.id}`).set(await as('admin')).send({ active: true })).status).toBe(200);
    // Deactivation revoked the old token (token version), so it stays refused.
    expect((await request(app).get(runPath()).set(bearer(acct.token))).status).toBe(401);
    expect((await request(app).get(runPath()).set(bearer(await loginAs(acct.email)))).status).toBe(200);
  });

  it('a role change refuses the old token at once', async () => {
    const acct = await createAccount('chair', `Kept Role ${tag}`);
    await readTwice('/api/scorecards', bearer(acct.token));
    expect((await request(app).patch(`/api/users/${acct.id}`).set(await as('admin')).send({ role: 'steward' })).status).toBe(200);
    expect((await request(app).get('/api/scorecards').set(bearer(acct.token))).status).toBe(401);
    const fresh = await loginAs(acct.email);
    expect((await request(app).get('/api/scorecards').set(bearer(fresh))).status).toBe(403); // stewards do not read cards
  });

  it('a deactivation made straight in the database takes effect once the kept check is 5 s old', async () => {
    const acct = await createAccount('statistician', `Kept Direct ${tag}`);
    await readTwice(runPath(), bearer(acct.token));
    await dataSource.query('UPDATE users SET active = false WHERE id = $1', [acct.id]);
    vi.useFakeTimers({ toFake: ['Date'] });
    try {
      vi.setSystemTime(Date.now() + 1_000);
      expect((await request(app).get(runPath()).set(bearer(acct.token))).status).toBe(200); // within the 5 s: kept
      vi.setSystemTime(Date.now() + 5_000);
      expect((await request(app).get(runPath()).set(bearer(acct.token))).status).toBe(401);
      expect((await request(app).get('/api/cohorts').set(bearer(acct.token))).status).toBe(401);
    } finally {
      vi.useRealTimers();
    }
  });

  it('a password reset refuses the old token at once', async () => {
    const acct = await createAccount('steward', `Kept Reset ${tag}`);
    await readTwice('/api/cohorts', bearer(acct.token));
    expect((await request(app).post(`/api/users/${acct.id}/password`).set(await as('admin')).send({ newPassword: 'another-long-password-1' })).status).toBe(204);
    expect((await request(app).get('/api/cohorts').set(bearer(acct.token))).status).toBe(401);
  });
});
