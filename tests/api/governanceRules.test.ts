// Governance rules found missing by probing: approving against a negative review without a reason, a revoked version
// re-approved through an older pending review, and a commit and a discard of one upload that both succeeded.
import { createHash, randomUUID } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RunGovernanceView, SignatureView, SignoffQueueItem } from '@shared/governance';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { whenProcessed } from '../../server/src/domain/cohorts/uploads';
import { app, bearer, dataSource, DEMO_PASSWORD, tokenFor, useDatabase } from '../helpers/api';
import { createCohortFixture, createScoreFixture, FIXTURE_MODEL, kestrelRows } from '../helpers/fixtures';

useDatabase();

const as = async (role: Parameters<typeof tokenFor>[0]) => bearer(await tokenFor(role));

/** A completed run inserted as a record (these tests are about the record, not the statistics). */
async function insertRun(scoreVersionId: string, cohortVersionId: string): Promise<string> {
  const sha = (s: string) => createHash('sha256').update(s).digest('hex');
  // Invented headline figures in the shape of RunResults, complete enough for a score card once the version is approved.
  const est = (estimate: number, lower: number, upper: number) => ({ estimate, lower, upper });
  const results = {
    overall: {
      engineVersion: 'test-fixture',
      n: 400,
      events: 60,
      nonEvents: 340,
      eventRate: 0.15,
      auc: { ...est(0.71, 0.66, 0.76), se: 0.025 },
      calibrationIntercept: { converged: true, ...est(0.21, 0.05, 0.37), se: 0.08 },
      calibrationSlope: { converged: true, ...est(0.93, 0.78, 1.08), se: 0.08, intercept: 0.1 },
      oe: { ...est(1.18, 1.04, 1.33), observed: 60, expected: 60 / 1.18, method: 'fixture' },
      thresholds: [{ threshold: 0.1 }],
      warnings: [],
    },
    subgroups: [],
    periods: [],
    minSubgroupEvents: 10,
  };
  const [row]: { id: string }[] = await dataSource.query(
    `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, results, engine_version, inputs_sha256, results_sha256, finished_at)
     VALUES ($1, $2, '{}'::jsonb, 'completed', 1, $3::jsonb, 'test-fixture', $4, $5, now()) RETURNING id`,
    [scoreVersionId, cohortVersionId, JSON.stringify(results), sha(randomUUID()), sha(randomUUID())],
  );
  return row.id;
}

const review = async (runId: string, verdict: string) => {
  const res = await request(app)
    .post(`/api/runs/${runId}/review`)
    .set(await as('statistician'))
    .send({ verdict, reasoning: `Reviewed as ${verdict}.` });
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  return res.body.id as string;
};
const sign = async (runId: string, body: Record<string, unknown>) =>
  request(app)
    .post(`/api/runs/${runId}/signoff`)
    .set(await as('chair'))
    .send({ password: DEMO_PASSWORD, ...body });
const governanceOf = async (runId: string): Promise<RunGovernanceView> =>
  (
    await request(app)
      .get(`/api/runs/${runId}/review`)
      .set(await as('chair'))
  ).body;

let cohortVersionId: string;
beforeAll(async () => {
  cohortVersionId = (
    await createCohortFixture(kestrelRows(40, 5), { label: `Rules cohort ${randomUUID().slice(0, 6)}` })
  ).cohortVersionId;
});

describe('approving against a negative review', () => {
  it.each(['not fit for use', 'recalibrate first'])(
    '"%s": needs the chair\'s written reason, kept in the manifest and the report',
    async (verdict) => {
      const score = await createScoreFixture({ model: FIXTURE_MODEL });
      const runId = await insertRun(score.scoreVersionId, cohortVersionId);
      await review(runId, verdict);
      const bare = await sign(runId, { decision: 'approve' });
      expect(bare.status).toBe(400);
      expect(bare.body.error).toMatch(/needs your written reason/);
      expect((await sign(runId, { decision: 'approve', reason: '   ' })).status).toBe(400);
      expect(
        (await dataSource.query('SELECT count(*)::int AS n FROM signatures WHERE run_id = $1', [runId]))[0].n,
      ).toBe(0);

      const reason = 'The committee accepts the risk for a three-month pilot on one ward, with monthly drift checks.';
      const signed = await sign(runId, { decision: 'approve', reason });
      expect(signed.status, JSON.stringify(signed.body)).toBe(201);
      const manifest = (await governanceOf(runId)).signatures;
      expect(manifest).toHaveLength(1);
      expect(manifest[0]).toMatchObject({
        meaning: 'approve for clinical use',
        reason,
        reviewVerdict: verdict,
        linkVerified: true,
      });
      const report = await request(app)
        .get(`/api/runs/${runId}/report`)
        .set(await as('chair'));
      expect(report.body.signatures.map((s: SignatureView) => [s.reason, s.reviewVerdict])).toEqual([
        [reason, verdict],
      ]);
    },
  );

  it('"fit for use": an approval needs no reason', async () => {
    const score = await createScoreFixture({ model: FIXTURE_MODEL });
    const runId = await insertRun(score.scoreVersionId, cohortVersionId);
    await review(runId, 'fit for use');
    expect((await sign(runId, { decision: 'approve' })).status).toBe(201);
  });
});

describe('a revocation', () => {
  it("closes the version's pending reviews, so none of them can approve it again", async () => {
    const score = await createScoreFixture({ model: FIXTURE_MODEL });
    const approvedRun = await insertRun(score.scoreVersionId, cohortVersionId);
    const pendingRun = await insertRun(score.scoreVersionId, cohortVersionId);
    await review(approvedRun, 'fit for use');
    const pendingReview = await review(pendingRun, 'fit for use');
    expect((await sign(approvedRun, { decision: 'approve' })).status).toBe(201);
    expect((await governanceOf(pendingRun)).can.sign).toBe(true);

    const revoked = await request(app)
      .post(`/api/score-versions/${score.scoreVersionId}/revoke`)
      .set(await as('chair'))
      .send({ password: DEMO_PASSWORD, reason: 'Drift in the last quarter: the score now over-predicts.' });
    expect(revoked.status).toBe(201);

    const again = await sign(pendingRun, { decision: 'approve' });
    expect(again.status).toBe(409);
    expect(again.body.error).toMatch(/revoked after this review/);
    expect((await sign(pendingRun, { decision: 'return', reason: 'no' })).status).toBe(409);
    const [version] = await dataSource.query('SELECT clinical_status FROM score_versions WHERE id = $1', [
      score.scoreVersionId,
    ]);
    expect(version.clinical_status).toBe('revoked');

    const g = await governanceOf(pendingRun);
    expect(g.can.sign).toBe(false);
    expect(g.reasonCannotSign).toMatch(/revoked after this review/);
    expect(g.reviews.find((r) => r.id === pendingReview)?.closedBy?.signatureId).toBe(revoked.body.id);
    const queue: SignoffQueueItem[] = (
      await request(app)
        .get('/api/signoff-queue')
        .set(await as('chair'))
    ).body;
    expect(queue.some((q) => q.runId === pendingRun)).toBe(false);
    const [audit] = await dataSource.query(
      `SELECT details FROM audit_log WHERE action = 'signature.revoke' AND target_id = $1`,
      [score.scoreVersionId],
    );
    expect(audit.details.closesReviews).toEqual([pendingReview]);

    // A review written after the revocation may be signed again: the committee decides on fresh evidence.
    await review(pendingRun, 'fit for use');
    expect((await governanceOf(pendingRun)).can.sign).toBe(true);
    expect((await sign(pendingRun, { decision: 'approve' })).status).toBe(201);
  });
});

describe('commit and discard of one upload', () => {
  const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-rules-'));
  afterAll(() => rmSync(tmp, { recursive: true, force: true }));
  let scoreVersionId: string;
  beforeAll(async () => {
    scoreVersionId = (await createScoreFixture({ model: FIXTURE_MODEL })).scoreVersionId;
  });

  async function checkedUpload(): Promise<{ id: string; rowsAccepted: number; plannedVersionId: string }> {
    const file = path.join(tmp, `${randomUUID()}.csv`);
    writeFileSync(
      file,
      `${[...kestrelQuarterCsv({ year: 2025, quarter: 3, index: 6, n: 60, seed: 11 })].join('\n')}\n`,
    );
    const up = await request(app)
      .post('/api/cohorts')
      .set(await as('steward'))
      .field('scoreVersionId', scoreVersionId)
      .field('cohortName', `Race cohort ${randomUUID().slice(0, 8)}`)
      .attach('file', file);
    expect(up.status, JSON.stringify(up.body)).toBe(201);
    const id = up.body.upload.id as string;
    expect(
      (
        await request(app)
          .post(`/api/uploads/${id}/mapping`)
          .set(await as('steward'))
          .send({ mapping: KESTREL_MAPPING })
      ).status,
    ).toBe(202);
    await whenProcessed(id);
    const [row] = await dataSource.query(
      'SELECT status, rows_accepted, rows_rejected, planned_version_id FROM cohort_uploads WHERE id = $1',
      [id],
    );
    expect(row.status).toBe('checked');
    return { id, rowsAccepted: row.rows_accepted, plannedVersionId: row.planned_version_id };
  }

  const commit = async (id: string) =>
    request(app)
      .post(`/api/uploads/${id}/commit`)
      .set(await as('steward'))
      .send({ excludeRejected: true });
  const discard = async (id: string) =>
    request(app)
      .post(`/api/uploads/${id}/discard`)
      .set(await as('steward'))
      .send({});
  const storedRows = async (versionId: string) =>
    (
      await dataSource.query(
        'SELECT coalesce(sum(row_count), 0)::int AS n FROM cohort_row_blocks WHERE cohort_version_id = $1',
        [versionId],
      )
    )[0].n as number;

  /** Either the commit won (a complete cohort version) or the discard did (no version, no rows): never both. */
  async function expectOneWinner(
    u: { id: string; rowsAccepted: number; plannedVersionId: string },
    c: { status: number },
    d: { status: number },
  ) {
    const ok = [c.status < 300, d.status < 300];
    expect(ok.filter(Boolean), `commit ${c.status}, discard ${d.status}`).toHaveLength(1);
    const [row] = await dataSource.query('SELECT status, cohort_version_id FROM cohort_uploads WHERE id = $1', [u.id]);
    const versions = (
      await dataSource.query('SELECT count(*)::int AS n FROM cohort_versions WHERE id = $1', [u.plannedVersionId])
    )[0].n;
    if (ok[0]) {
      expect(d.status).toBe(409);
      expect(row.status).toBe('committed');
      expect(versions).toBe(1);
      expect(await storedRows(u.plannedVersionId)).toBe(u.rowsAccepted);
    } else {
      expect(c.status).toBe(409);
      expect(row.status).toBe('discarded');
      expect(versions).toBe(0);
      expect(await storedRows(u.plannedVersionId)).toBe(0);
    }
    return ok[0] ? 'commit' : 'discard';
  }

  /** Holds the upload's row so both requests queue behind it in a known order, then lets them go. */
  async function queued(
    u: { id: string },
    first: (id: string) => Promise<{ status: number }>,
    second: (id: string) => Promise<{ status: number }>,
  ) {
    const holder = dataSource.createQueryRunner();
    await holder.connect();
    await holder.startTransaction();
    await holder.query('SELECT 1 FROM cohort_uploads WHERE id = $1 FOR UPDATE', [u.id]);
    const waiting = async (n: number) => {
      for (;;) {
        const [{ w }] = await dataSource.query(
          `SELECT count(*)::int AS w FROM pg_stat_activity WHERE datname = current_database() AND wait_event_type = 'Lock'`,
        );
        if (w >= n) return;
        await new Promise((r) => setTimeout(r, 20));
      }
    };
    try {
      const a = first(u.id);
      await waiting(1);
      const b = second(u.id);
      await waiting(2);
      await holder.commitTransaction();
      return await Promise.all([a, b]);
    } finally {
      if (holder.isTransactionActive) await holder.rollbackTransaction();
      await holder.release();
    }
  }

  it('sent at once: exactly one succeeds', async () => {
    const winners: string[] = [];
    for (let i = 0; i < 3; i++) {
      const u = await checkedUpload();
      const [c, d] = await Promise.all([commit(u.id), discard(u.id)]);
      winners.push(await expectOneWinner(u, c, d));
    }
    console.log(`parallel commit/discard winners: ${winners.join(', ')}`);
  });

  it('a discard queued behind a commit is refused, and the version keeps its rows', async () => {
    const u = await checkedUpload();
    const [c, d] = await queued(u, commit, discard);
    expect(await expectOneWinner(u, c, d)).toBe('commit');
  });

  it('a commit queued behind a discard is refused', async () => {
    const u = await checkedUpload();
    const [d, c] = await queued(u, discard, commit);
    expect(await expectOneWinner(u, c, d)).toBe('discard');
  });
});
