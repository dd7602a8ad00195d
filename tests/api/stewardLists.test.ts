// The lists a statistician and a chair work from: runs with their review and sign-off status (filtered and searched),
// drift alerts filtered by score and acknowledged together, audit entries in names, and the run start's defaults.
import { createHash, randomUUID } from 'node:crypto';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { whenProcessed } from '../../server/src/domain/cohorts/uploads';
import request from 'supertest';
import { beforeAll, describe, expect, it } from 'vitest';
import { app, bearer, dataSource, tokenFor, useDatabase } from '../helpers/api';
import { createCohortFixture, createScoreFixture, kestrelRows, type ScoreFixture } from '../helpers/fixtures';

useDatabase();

const tag = randomUUID().slice(0, 8);
let score: ScoreFixture;
let other: ScoreFixture;
let cohortVersionId: string;
const runs: Record<'plain' | 'reviewed' | 'approved' | 'otherScore', string> = {
  plain: '',
  reviewed: '',
  approved: '',
  otherScore: '',
};

async function insertRun(scoreVersionId: string): Promise<string> {
  const sha = (s: string) => createHash('sha256').update(s).digest('hex');
  const results = {
    overall: { n: 100, events: 20, auc: { estimate: 0.7 }, oe: { estimate: 1 } },
    subgroups: [],
    periods: [],
    minSubgroupEvents: 10,
  };
  const [r] = await dataSource.query(
    `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, results, engine_version, inputs_sha256, results_sha256, finished_at)
     VALUES ($1, $2, '{}'::jsonb, 'completed', 1, $3::jsonb, 'fixture', $4, $5, now()) RETURNING id`,
    [scoreVersionId, cohortVersionId, JSON.stringify(results), sha(randomUUID()), sha(randomUUID())],
  );
  return r.id;
}

beforeAll(async () => {
  score = await createScoreFixture({ name: `Listed score ${tag}` });
  other = await createScoreFixture({ name: `Other listed score ${tag}` });
  cohortVersionId = (await createCohortFixture(kestrelRows(60, 3), { name: `Listed cohort ${tag}` })).cohortVersionId;
  for (const k of ['plain', 'reviewed', 'approved'] as const) runs[k] = await insertRun(score.scoreVersionId);
  runs.otherScore = await insertRun(other.scoreVersionId);
  const [stat] = await dataSource.query(
    `SELECT id FROM users WHERE role = 'statistician' AND active ORDER BY created_at LIMIT 1`,
  );
  const [chair] = await dataSource.query(
    `SELECT id FROM users WHERE role = 'chair' AND active ORDER BY created_at LIMIT 1`,
  );
  for (const k of ['reviewed', 'approved'] as const) {
    const [rv] = await dataSource.query(
      `INSERT INTO run_reviews (run_id, verdict, reasoning, reviewer_id) VALUES ($1, 'fit for use', 'fixture review', $2) RETURNING id`,
      [runs[k], stat.id],
    );
    if (k === 'approved') {
      await dataSource.query(
        `INSERT INTO signatures (run_id, score_version_id, review_id, signer_id, printed_name, role, meaning, signed_at, record_sha256)
         VALUES ($1, $2, $3, $4, 'Fixture Chair', 'chair', 'approve for clinical use', now() + interval '1 second', $5)`,
        [runs[k], score.scoreVersionId, rv.id, chair.id, 'a'.repeat(64)],
      );
    }
  }
});

describe('the runs list', () => {
  const list = async (query: Record<string, string>) => {
    const res = await request(app)
      .get('/api/runs')
      .query({ limit: 200, ...query })
      .set(bearer(await tokenFor('chair')));
    expect(res.status, JSON.stringify(res.body)).toBe(200);
    return res.body as {
      total: number;
      runs: { id: string; review: { verdict: string } | null; signoff: { meaning: string; signedBy: string } | null }[];
    };
  };

  it("shows each run's review verdict and sign-off", async () => {
    const got = await list({ score: score.scoreId });
    const byId = new Map(got.runs.map((r) => [r.id, r]));
    expect(byId.get(runs.plain)).toMatchObject({ review: null, signoff: null });
    expect(byId.get(runs.reviewed)).toMatchObject({ review: { verdict: 'fit for use' }, signoff: null });
    expect(byId.get(runs.approved)).toMatchObject({
      review: { verdict: 'fit for use' },
      signoff: { meaning: 'approve for clinical use', signedBy: 'Fixture Chair' },
    });
    expect(byId.has(runs.otherScore)).toBe(false);
    expect(got.total).toBe(3);
  });

  it('filters by where a run stands in review and sign-off', async () => {
    const ids = async (stage: string) => (await list({ score: score.scoreId, stage })).runs.map((r) => r.id);
    expect(await ids('not reviewed')).toEqual([runs.plain]);
    expect(await ids('awaiting sign-off')).toEqual([runs.reviewed]);
    expect(await ids('approved')).toEqual([runs.approved]);
    expect(await ids('returned')).toEqual([]);
    const bad = await request(app)
      .get('/api/runs')
      .query({ stage: 'signed' })
      .set(bearer(await tokenFor('chair')));
    expect(bad.status).toBe(400);
  });

  it('searches the score and cohort names, and takes % and _ literally', async () => {
    const byOther = await list({ search: `other listed score ${tag}` });
    expect(byOther.runs.map((r) => r.id)).toEqual([runs.otherScore]);
    expect(byOther.total).toBe(1);
    const byCohort = await list({ search: `Listed cohort ${tag}` });
    expect(byCohort.total).toBe(4);
    expect((await list({ search: `%${tag}` })).total).toBe(0);
  });
});

describe('drift alerts', () => {
  let alertIds: string[] = [];
  let otherAlert = '';
  beforeAll(async () => {
    const [rule] = await dataSource.query(
      `INSERT INTO alert_rules (score_id, kind) VALUES ($1, 'oe-limit') RETURNING id`,
      [score.scoreId],
    );
    const [otherRule] = await dataSource.query(
      `INSERT INTO alert_rules (score_id, kind) VALUES ($1, 'oe-limit') RETURNING id`,
      [other.scoreId],
    );
    alertIds = [];
    for (const period of ['2026-Q1', '2026-Q2', '2026-Q3']) {
      const [a] = await dataSource.query(
        `INSERT INTO drift_alerts (score_version_id, rule_id, period, detail) VALUES ($1, $2, $3, '{"message":"O/E above the limit"}') RETURNING id`,
        [score.scoreVersionId, rule.id, period],
      );
      alertIds.push(a.id);
    }
    const [o] = await dataSource.query(
      `INSERT INTO drift_alerts (score_version_id, rule_id, period) VALUES ($1, $2, '2026-Q1') RETURNING id`,
      [other.scoreVersionId, otherRule.id],
    );
    otherAlert = o.id;
  });

  it('are filtered by score', async () => {
    const res = await request(app)
      .get('/api/alerts')
      .query({ score: score.scoreId })
      .set(bearer(await tokenFor('statistician')));
    expect(res.status).toBe(200);
    expect(res.body.alerts.map((a: { id: string }) => a.id).sort()).toEqual([...alertIds].sort());
  });

  it('are acknowledged together with one note, all or none, with an audit entry each', async () => {
    const token = await tokenFor('statistician');
    // One already acknowledged: the whole request is refused and nothing changes.
    await request(app)
      .post(`/api/alerts/${alertIds[2]}/acknowledge`)
      .set(bearer(token))
      .send({ note: 'seen alone' })
      .expect(200);
    const refused = await request(app)
      .post('/api/alerts/acknowledge')
      .set(bearer(token))
      .send({ ids: alertIds, note: 'reviewed at the quarterly meeting' });
    expect(refused.status).toBe(409);
    expect(refused.body.error).toMatch(/1 of the chosen alerts has already been acknowledged/);
    const [{ n: stillOpen }] = await dataSource.query(
      'SELECT count(*)::int AS n FROM drift_alerts WHERE id = ANY($1::uuid[]) AND acknowledged_at IS NULL',
      [alertIds.slice(0, 2)],
    );
    expect(stillOpen).toBe(2);
    expect(
      (
        await request(app)
          .post('/api/alerts/acknowledge')
          .set(bearer(token))
          .send({ ids: [randomUUID()], note: 'x' })
      ).status,
    ).toBe(404);
    expect(
      (await request(app).post('/api/alerts/acknowledge').set(bearer(token)).send({ ids: [], note: 'x' })).status,
    ).toBe(400);

    const ok = await request(app)
      .post('/api/alerts/acknowledge')
      .set(bearer(token))
      .send({ ids: [...alertIds.slice(0, 2), otherAlert], note: 'reviewed at the quarterly meeting' });
    expect(ok.status, JSON.stringify(ok.body)).toBe(200);
    expect(ok.body.alerts).toHaveLength(3);
    for (const a of ok.body.alerts)
      expect(a).toMatchObject({ ackNote: 'reviewed at the quarterly meeting', acknowledgedAt: expect.any(String) });
    const audit = await dataSource.query(
      `SELECT target_id, details FROM audit_log WHERE action = 'drift_alert.acknowledged' AND target_id = ANY($1)`,
      [[...alertIds.slice(0, 2), otherAlert]],
    );
    expect(audit).toHaveLength(3);
    for (const e of audit) expect(e.details).toEqual({ note: 'reviewed at the quarterly meeting', together: 3 });
    expect(
      (
        await request(app)
          .post('/api/alerts/acknowledge')
          .set(bearer(await tokenFor('admin')))
          .send({ ids: alertIds, note: 'x' })
      ).status,
    ).toBe(403);
  });
});

describe('the audit page', () => {
  it('names the actor and the target in words', async () => {
    const res = await request(app)
      .get('/api/audit')
      .query({ action: 'drift_alert.acknowledged', limit: 50 })
      .set(bearer(await tokenFor('admin')));
    expect(res.status).toBe(200);
    const entry = res.body.entries.find((e: { targetId: string }) => (e.targetId === null ? false : true));
    expect(entry).toBeTruthy();
    const [actor] = await dataSource.query('SELECT name FROM users WHERE id = $1', [entry.actorId]);
    expect(entry.actorName).toBe(actor.name);
    expect(entry.targetName).toMatch(/^alert on .+ v1, 2026-Q[1-3]$/);
  });
  it('filters by date', async () => {
    const token = await tokenFor('admin');
    const future = await request(app).get('/api/audit').query({ from: '2999-01-01T00:00:00Z' }).set(bearer(token));
    expect(future.body.total).toBe(0);
    const today = await request(app)
      .get('/api/audit')
      .query({ from: new Date(Date.now() - 3600_000).toISOString(), to: new Date(Date.now() + 60_000).toISOString() })
      .set(bearer(token));
    expect(today.body.total).toBeGreaterThan(0);
  });
});

describe('the run start form', () => {
  it('offers each cohort version with its periods (month or quarter) and its subgroup columns', async () => {
    // A real upload whose period column holds quarters (2026-Q1, 2026-Q2), so the summary is the upload's own.
    const lines = [...kestrelQuarterCsv({ year: 2026, quarter: 1, index: 1, n: 60, seed: 9 })].map((l, i) =>
      i === 0 ? l : l.replace(/,2026-0\d,/, i % 2 ? ',2026-Q1,' : ',2026-Q2,'),
    );
    const file = path.join(mkdtempSync(path.join(tmpdir(), 'plumbline-lists-')), 'quarters.csv');
    writeFileSync(file, `${lines.join('\n')}\n`);
    const steward = await tokenFor('steward');
    const up = await request(app)
      .post('/api/cohorts')
      .set(bearer(steward))
      .field('scoreVersionId', score.scoreVersionId)
      .field('cohortName', `Quarterly ${tag}`)
      .attach('file', file);
    expect(up.status, JSON.stringify(up.body)).toBe(201);
    await request(app)
      .post(`/api/uploads/${up.body.upload.id}/mapping`)
      .set(bearer(steward))
      .send({ mapping: KESTREL_MAPPING })
      .expect(202);
    await whenProcessed(up.body.upload.id);
    const stored = await request(app).post(`/api/uploads/${up.body.upload.id}/commit`).set(bearer(steward)).send({});
    expect(stored.status, JSON.stringify(stored.body)).toBe(201);
    const quarterly = { cohortVersionId: stored.body.cohortVersionId as string };
    const res = await request(app)
      .get('/api/runs/options')
      .set(bearer(await tokenFor('steward')));
    const q = res.body.cohortVersions.find((c: { id: string }) => c.id === quarterly.cohortVersionId);
    expect(q).toMatchObject({ hasDates: true, periods: 'quarter' });
    expect(q.groupColumns).toEqual(['age_band', 'sex', 'site', 'unit']);
    const m = res.body.cohortVersions.find((c: { id: string }) => c.id === cohortVersionId);
    expect(m.periods).toBe(m.hasDates ? 'month' : null);
  });
});
