// Review, sign-off, revocation, comments, the chair's queue, score cards, the report and e-mail: every transition,
// every forbidden actor, and the database's own refusals. Runs are inserted as completed records directly, with
// invented summary figures (these tests check the record-keeping, not the statistics).
import { createHash, randomUUID } from 'node:crypto';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RunGovernanceView, ScoreCardView, SignatureView } from '@shared/governance';
import { config } from '../../server/src/platform/config';
import { verifyAuditChain } from '../../server/src/domain/accounts/audit';
import { clearReceived, receivedMessages, startFakeSmtp } from '../../server/src/platform/mail/fakeSmtp';
import type { JobHandler } from '../../server/src/jobs/queue';
import { mailJob, queueEmail, sendPendingOnce } from '../../server/src/domain/notifications/mail';
import {
  app,
  bearer,
  dataSource,
  DEMO_PASSWORD,
  loginAs,
  refusedTwice,
  tokenFor,
  uniqueEmail,
  useDatabase,
} from '../helpers/api';
import { createCohortFixture, createScoreFixture, kestrelRows, type ScoreFixture } from '../helpers/fixtures';

useDatabase();

const est = (estimate: number, lower: number, upper: number) => ({ estimate, lower, upper });

/** Invented headline figures in the shape of RunResults (not computed: these tests are about the record). */
function fakeResults(n: number, events: number) {
  return {
    overall: {
      engineVersion: 'test-fixture',
      n,
      events,
      nonEvents: n - events,
      eventRate: events / n,
      auc: { ...est(0.71, 0.66, 0.76), se: 0.025 },
      calibrationIntercept: { converged: true, ...est(0.21, 0.05, 0.37), se: 0.08 },
      calibrationSlope: { converged: true, ...est(0.93, 0.78, 1.08), se: 0.08, intercept: 0.1 },
      oe: { ...est(1.18, 1.04, 1.33), observed: events, expected: events / 1.18, method: 'fixture' },
      thresholds: [{ threshold: 0.1 }],
      warnings: [],
    },
    subgroups: [],
    periods: [],
    minSubgroupEvents: 10,
  };
}

async function insertRun(
  scoreVersionId: string,
  cohortVersionId: string,
  status: 'completed' | 'queued' = 'completed',
): Promise<string> {
  const results = status === 'completed' ? fakeResults(400, 60) : null;
  const sha = (s: string) => createHash('sha256').update(s).digest('hex');
  const rows: { id: string }[] = await dataSource.query(
    `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, results, engine_version, inputs_sha256, results_sha256, finished_at)
     VALUES ($1, $2, '{}'::jsonb, $3, $4, $5::jsonb, $6, $7, $8, $9) RETURNING id`,
    [
      scoreVersionId,
      cohortVersionId,
      status,
      status === 'completed' ? 1 : 0,
      results ? JSON.stringify(results) : null,
      results ? 'test-fixture' : null,
      results ? sha(`inputs ${randomUUID()}`) : null,
      results ? sha(JSON.stringify(results) + randomUUID()) : null,
      results ? new Date() : null,
    ],
  );
  return rows[0].id;
}

let score: ScoreFixture;
let otherScore: ScoreFixture;
let cohortVersionId: string;
let runA: string; // the main run: reviewed, returned, revised, approved by one of two racing chairs, revoked
let runB: string; // reviewed by a statistician later promoted to chair
let runQueued: string;
let runOther: string; // a run of a score version that is never approved
let chair2Token: string;
let promotedToken: string;

const as = async (role: Parameters<typeof tokenFor>[0]) => bearer(await tokenFor(role));

async function createAccount(role: string, name: string): Promise<{ id: string; email: string }> {
  const email = uniqueEmail(role);
  const res = await request(app)
    .post('/api/users')
    .set(await as('admin'))
    .send({ email, name, role, password: DEMO_PASSWORD });
  expect(res.status).toBe(201);
  return { id: res.body.id ?? res.body.user?.id, email };
}

const governanceOf = async (
  runId: string,
  role: Parameters<typeof tokenFor>[0] = 'statistician',
): Promise<RunGovernanceView> => {
  const res = await request(app)
    .get(`/api/runs/${runId}/review`)
    .set(await as(role));
  expect(res.status).toBe(200);
  return res.body as RunGovernanceView;
};

const outboxFor = async (kind: string, runTitlePart: string) =>
  (await dataSource.query(`SELECT recipients, subject FROM email_outbox WHERE kind = $1 AND subject LIKE $2`, [
    kind,
    `%${runTitlePart}%`,
  ])) as {
    recipients: string[];
    subject: string;
  }[];

let stopSmtp: (() => Promise<void>) | null = null;

beforeAll(async () => {
  score = await createScoreFixture({ name: `Governance fixture ${randomUUID().slice(0, 8)}` });
  otherScore = await createScoreFixture({ name: `Governance other ${randomUUID().slice(0, 8)}` });
  const cohort = await createCohortFixture(kestrelRows(50, 3), { label: `Gov cohort ${randomUUID().slice(0, 6)}` });
  cohortVersionId = cohort.cohortVersionId;
  runA = await insertRun(score.scoreVersionId, cohortVersionId);
  runB = await insertRun(score.scoreVersionId, cohortVersionId);
  runQueued = await insertRun(score.scoreVersionId, cohortVersionId, 'queued');
  runOther = await insertRun(otherScore.scoreVersionId, cohortVersionId);
  const chair2 = await createAccount('chair', 'Second Test Chair');
  chair2Token = await loginAs(chair2.email);
});

afterAll(async () => {
  if (stopSmtp) await stopSmtp();
  // Leave no queued fixture run for the next file's queue worker.
  await dataSource
    .query(`DELETE FROM validation_runs WHERE id = $1 AND status = 'queued'`, [runQueued])
    .catch(() => undefined);
});

describe('statistician review', () => {
  it('is refused to every role but the statistician', async () => {
    for (const role of ['steward', 'chair', 'clinician', 'admin'] as const) {
      const res = await request(app)
        .post(`/api/runs/${runA}/review`)
        .set(await as(role))
        .send({ verdict: 'fit for use', reasoning: 'looks fine' });
      expect(res.status, role).toBe(403);
    }
  });

  it('needs a verdict from the list and a reasoning', async () => {
    const h = await as('statistician');
    expect(
      (await request(app).post(`/api/runs/${runA}/review`).set(h).send({ verdict: 'fit for use', reasoning: '   ' }))
        .status,
    ).toBe(400);
    expect(
      (await request(app).post(`/api/runs/${runA}/review`).set(h).send({ verdict: 'great', reasoning: 'x' })).status,
    ).toBe(400);
  });

  it('is refused on a run that has not completed', async () => {
    const res = await request(app)
      .post(`/api/runs/${runQueued}/review`)
      .set(await as('statistician'))
      .send({ verdict: 'fit for use', reasoning: 'too early' });
    expect(res.status).toBe(409);
    expect(res.body.error).toMatch(/completed/);
  });

  it('records a review, tells the chairs, and puts the run in the queue', async () => {
    const res = await request(app)
      .post(`/api/runs/${runA}/review`)
      .set(await as('statistician'))
      .send({ verdict: 'recalibrate first', reasoning: 'O/E above 1: the score under-predicts readmissions here.' });
    expect(res.status).toBe(201);
    expect(res.body.current).toBe(true);
    const g = await governanceOf(runA);
    expect(g.reviews).toHaveLength(1);
    expect(g.can.review).toBe(true);
    const mails = await outboxFor('review.awaiting_signoff', '');
    expect(mails.some((m) => m.recipients.includes('chair@demo.test'))).toBe(true);
    const queue = await request(app)
      .get('/api/signoff-queue')
      .set(await as('chair'));
    expect(queue.status).toBe(200);
    expect(queue.body.some((q: { runId: string }) => q.runId === runA)).toBe(true);
    expect(
      (
        await request(app)
          .get('/api/signoff-queue')
          .set(await as('statistician'))
      ).status,
    ).toBe(403);
  });

  it('is superseded by a revision while the old review stays visible', async () => {
    const res = await request(app)
      .post(`/api/runs/${runA}/review`)
      .set(await as('statistician'))
      .send({ verdict: 'fit for use', reasoning: 'After discussion: the excess is small and the slope is near 1.' });
    expect(res.status).toBe(201);
    const g = await governanceOf(runA, 'chair');
    expect(g.reviews).toHaveLength(2);
    expect(g.reviews.filter((r) => r.current)).toHaveLength(1);
    expect(g.reviews[0].supersededBy).toBe(g.reviews[1].id);
    expect(g.reviews[1].verdict).toBe('fit for use');
  });

  it('cannot be edited or deleted by direct SQL, nor its superseded link moved', async () => {
    const [old] = await dataSource.query(`SELECT id FROM run_reviews WHERE run_id = $1 AND superseded_by IS NOT NULL`, [
      runA,
    ]);
    await refusedTwice(`UPDATE run_reviews SET reasoning = 'changed' WHERE run_id = $1`, [runA], /immutable/);
    // The API may set the superseded link (its one column grant), so only the trigger stands in the way of moving it.
    await expect(
      dataSource.query(`UPDATE run_reviews SET superseded_by = NULL WHERE id = $1`, [old.id]),
    ).rejects.toThrow(/immutable/);
    await refusedTwice(`DELETE FROM run_reviews WHERE run_id = $1`, [runA], /append-only/);
  });
});

describe('chair sign-off', () => {
  it('is refused to every role but the chair', async () => {
    for (const role of ['steward', 'statistician', 'clinician', 'admin'] as const) {
      const res = await request(app)
        .post(`/api/runs/${runA}/signoff`)
        .set(await as(role))
        .send({ decision: 'approve', password: DEMO_PASSWORD });
      expect(res.status, role).toBe(403);
    }
  });

  it('needs the password re-entered, and a wrong one records nothing', async () => {
    const h = await as('chair');
    expect((await request(app).post(`/api/runs/${runA}/signoff`).set(h).send({ decision: 'approve' })).status).toBe(
      400,
    );
    const wrong = await request(app)
      .post(`/api/runs/${runA}/signoff`)
      .set(h)
      .send({ decision: 'approve', password: 'not-the-password' });
    expect(wrong.status).toBe(403);
    expect(wrong.body.error).toMatch(/password/);
    const [{ n }] = await dataSource.query(`SELECT count(*)::int AS n FROM signatures WHERE run_id = $1`, [runA]);
    expect(n).toBe(0);
    const [failed] = await dataSource.query(
      `SELECT count(*)::int AS n FROM audit_log WHERE action = 'signature.password_failed' AND target_id = $1`,
      [runA],
    );
    expect(failed.n).toBeGreaterThan(0);
  });

  it('is refused on a run without a review', async () => {
    const res = await request(app)
      .post(`/api/runs/${runOther}/signoff`)
      .set(await as('chair'))
      .send({ decision: 'approve', password: DEMO_PASSWORD });
    expect(res.status).toBe(409);
    expect(res.body.error).toMatch(/no review/);
  });

  it('a return needs a reason, then sends the run back to the statistician', async () => {
    const h = await as('chair');
    expect(
      (
        await request(app)
          .post(`/api/runs/${runA}/signoff`)
          .set(h)
          .send({ decision: 'return', password: DEMO_PASSWORD })
      ).status,
    ).toBe(400);
    const res = await request(app).post(`/api/runs/${runA}/signoff`).set(h).send({
      decision: 'return',
      password: DEMO_PASSWORD,
      reason: 'Please add the subgroup results for the North annex.',
    });
    expect(res.status).toBe(201);
    const sig = res.body as SignatureView;
    expect(sig.meaning).toBe('return to statistician');
    expect(sig.printedName).toBeTruthy();
    expect(sig.role).toBe('chair');
    expect(sig.linkVerified).toBe(true);
    // The same review cannot be decided twice.
    const again = await request(app)
      .post(`/api/runs/${runA}/signoff`)
      .set(h)
      .send({ decision: 'approve', password: DEMO_PASSWORD });
    expect(again.status).toBe(409);
    const queue = await request(app).get('/api/signoff-queue').set(h);
    expect(queue.body.some((q: { runId: string }) => q.runId === runA)).toBe(false);
    const mails = await outboxFor('decision.returned', '');
    expect(
      mails.some((m) => m.recipients.includes('steward@demo.test') && m.recipients.includes('statistician@demo.test')),
    ).toBe(true);
    const [{ status }] = await dataSource.query(`SELECT clinical_status AS status FROM score_versions WHERE id = $1`, [
      score.scoreVersionId,
    ]);
    expect(status).toBe('not approved');
  });

  it('is refused to a chair who reviewed the run', async () => {
    const account = await createAccount('statistician', 'Promoted Reviewer');
    const statToken = await loginAs(account.email);
    const review = await request(app)
      .post(`/api/runs/${runB}/review`)
      .set(bearer(statToken))
      .send({ verdict: 'fit for use', reasoning: 'fine' });
    expect(review.status).toBe(201);
    expect(
      (
        await request(app)
          .patch(`/api/users/${account.id}`)
          .set(await as('admin'))
          .send({ role: 'chair' })
      ).status,
    ).toBe(200);
    promotedToken = await loginAs(account.email);
    const g = (await request(app).get(`/api/runs/${runB}/review`).set(bearer(promotedToken))).body as RunGovernanceView;
    expect(g.can.sign).toBe(false);
    expect(g.reasonCannotSign).toMatch(/you reviewed/);
    const res = await request(app)
      .post(`/api/runs/${runB}/signoff`)
      .set(bearer(promotedToken))
      .send({ decision: 'approve', password: DEMO_PASSWORD });
    expect(res.status).toBe(403);
    expect(res.body.error).toMatch(/reviewed this run/);
    const queue = await request(app).get('/api/signoff-queue').set(bearer(promotedToken));
    expect(queue.body.find((q: { runId: string }) => q.runId === runB).ownReview).toBe(true);
  });

  it('two chairs approving at once: exactly one signature is recorded', async () => {
    const revised = await request(app)
      .post(`/api/runs/${runA}/review`)
      .set(await as('statistician'))
      .send({ verdict: 'fit for use', reasoning: 'Subgroups added; no subgroup departs from the overall picture.' });
    expect(revised.status).toBe(201);
    const body = { decision: 'approve', password: DEMO_PASSWORD };
    const [one, two] = await Promise.all([
      request(app)
        .post(`/api/runs/${runA}/signoff`)
        .set(await as('chair'))
        .send(body),
      request(app).post(`/api/runs/${runA}/signoff`).set(bearer(chair2Token)).send(body),
    ]);
    expect([one.status, two.status].sort()).toEqual([201, 409]);
    const approvals = await dataSource.query(
      `SELECT * FROM signatures WHERE run_id = $1 AND meaning = 'approve for clinical use'`,
      [runA],
    );
    expect(approvals).toHaveLength(1);
    const [v] = await dataSource.query(`SELECT clinical_status, approved_run_id FROM score_versions WHERE id = $1`, [
      score.scoreVersionId,
    ]);
    expect(v).toEqual({ clinical_status: 'approved', approved_run_id: runA });
    const g = await governanceOf(runA, 'chair');
    expect(g.signatures.map((s) => s.meaning)).toEqual(['return to statistician', 'approve for clinical use']);
    expect(g.signatures.every((s) => s.linkVerified)).toBe(true);
    expect(g.can.review).toBe(false);
    // Once approved the record is closed to further reviews.
    const late = await request(app)
      .post(`/api/runs/${runA}/review`)
      .set(await as('statistician'))
      .send({ verdict: 'not fit for use', reasoning: 'late' });
    expect(late.status).toBe(409);
  });

  it("every run's panel names the approved run: its number within the score version, its cohort and the signing date", async () => {
    const [signed] = await dataSource.query(
      `SELECT signed_at FROM signatures WHERE run_id = $1 AND meaning = 'approve for clinical use'`,
      [runA],
    );
    const [cv] = await dataSource.query(`SELECT label FROM cohort_versions WHERE id = $1`, [cohortVersionId]);
    const expected = {
      runId: runA,
      runNumber: 1,
      cohortLabel: cv.label,
      signedAt: new Date(signed.signed_at).toISOString(),
    };
    expect((await governanceOf(runA)).approval).toEqual(expected);
    // Another run of the same score version says which run carries the approval, not a bare "approved".
    const other = await governanceOf(runB, 'chair');
    expect(other.clinicalStatus).toBe('approved');
    expect(other.approval).toEqual(expected);
    // A score version never approved has nothing to name.
    expect((await governanceOf(runOther)).approval).toBeNull();
  });

  it('the database refuses UPDATE and DELETE of a signature, even by direct SQL', async () => {
    await refusedTwice(`UPDATE signatures SET printed_name = 'Someone Else' WHERE run_id = $1`, [runA], /append-only/);
    await refusedTwice(`UPDATE signatures SET signed_at = now() WHERE run_id = $1`, [runA], /append-only/);
    await refusedTwice(`DELETE FROM signatures WHERE run_id = $1`, [runA], /append-only/);
  });

  it('a signature copied onto another record no longer verifies (the hash links it to its run)', async () => {
    const qr = dataSource.createQueryRunner();
    await qr.connect();
    await qr.startTransaction();
    try {
      const [sig] = await qr.query(
        `SELECT * FROM signatures WHERE run_id = $1 AND meaning = 'approve for clinical use'`,
        [runA],
      );
      const [rv] = await qr.query(`SELECT id FROM run_reviews WHERE run_id = $1`, [runB]);
      await qr.query(
        `INSERT INTO signatures (run_id, score_version_id, review_id, signer_id, printed_name, role, meaning, reason, signed_at, record_sha256)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10)`,
        [
          runB,
          sig.score_version_id,
          rv.id,
          sig.signer_id,
          sig.printed_name,
          sig.role,
          sig.meaning,
          sig.reason,
          sig.signed_at,
          sig.record_sha256,
        ],
      );
      const { listSignatures } = await import('../../server/src/domain/governance/governance');
      const copied = await listSignatures(runB, qr.manager);
      expect(copied).toHaveLength(1);
      expect(copied[0].linkVerified).toBe(false);
    } finally {
      await qr.rollbackTransaction();
      await qr.release();
    }
  });
});

describe('score cards', () => {
  it('show approved versions only, with the local figures and who signed', async () => {
    const res = await request(app)
      .get('/api/scorecards')
      .set(await as('clinician'));
    expect(res.status).toBe(200);
    const cards = res.body as ScoreCardView[];
    const card = cards.find((c) => c.scoreVersionId === score.scoreVersionId);
    expect(card).toBeDefined();
    expect(cards.some((c) => c.scoreVersionId === otherScore.scoreVersionId)).toBe(false);
    expect(card!.validation!.runId).toBe(runA);
    expect(card!.validation!.auc!.estimate).toBe(0.71);
    expect(card!.validation!.patients).toBe(400);
    expect(card!.validation!.plainWords.join(' ')).toMatch(/more outcomes happened than the score predicted/);
    expect(card!.approval!.role).toBe('chair');
    expect(card!.caution).toBeTruthy();
    expect(card!.inputs.map((i) => i.name)).toContain('length of stay');
    // Summary numbers only: nothing patient-level travels with a card.
    expect(JSON.stringify(res.body)).not.toMatch(/cohort_rows|lineNo|predictors"/);
    expect(
      (
        await request(app)
          .get(`/api/scorecards/${score.scoreVersionId}`)
          .set(await as('clinician'))
      ).status,
    ).toBe(200);
    expect(
      (
        await request(app)
          .get(`/api/scorecards/${otherScore.scoreVersionId}`)
          .set(await as('clinician'))
      ).status,
    ).toBe(404);
    expect(
      (
        await request(app)
          .get('/api/scorecards')
          .set(await as('steward'))
      ).status,
    ).toBe(403);
  });

  it('a clinician cannot read runs, their record, the report, or comments', async () => {
    const h = await as('clinician');
    for (const path of [
      `/api/runs/${runA}`,
      `/api/runs/${runA}/review`,
      `/api/runs/${runA}/report`,
      `/api/runs/${runA}/comments`,
      '/api/runs',
      '/api/cohorts',
    ]) {
      expect((await request(app).get(path).set(h)).status, path).toBe(403);
    }
    expect((await request(app).post(`/api/runs/${runA}/comments`).set(h).send({ body: 'hello' })).status).toBe(403);
  });
});

describe('revocation', () => {
  it('is a signed act: chair only, password and reason required', async () => {
    const url = `/api/score-versions/${score.scoreVersionId}/revoke`;
    expect(
      (
        await request(app)
          .post(url)
          .set(await as('steward'))
          .send({ password: DEMO_PASSWORD, reason: 'x' })
      ).status,
    ).toBe(403);
    expect(
      (
        await request(app)
          .post(url)
          .set(await as('chair'))
          .send({ password: DEMO_PASSWORD })
      ).status,
    ).toBe(400);
    expect(
      (
        await request(app)
          .post(url)
          .set(await as('chair'))
          .send({ password: 'wrong-password', reason: 'x' })
      ).status,
    ).toBe(403);
    const res = await request(app)
      .post(url)
      .set(bearer(chair2Token))
      .send({ password: DEMO_PASSWORD, reason: 'Drift: O/E rose above 1.3 in the last two quarters.' });
    expect(res.status).toBe(201);
    expect(res.body.meaning).toBe('revoke approval');
    expect(res.body.revokesSignatureId).toBeTruthy();
    expect(res.body.linkVerified).toBe(true);
    const [v] = await dataSource.query(`SELECT clinical_status FROM score_versions WHERE id = $1`, [
      score.scoreVersionId,
    ]);
    expect(v.clinical_status).toBe('revoked');
    expect(
      (
        await request(app)
          .get(`/api/scorecards/${score.scoreVersionId}`)
          .set(await as('clinician'))
      ).status,
    ).toBe(404);
    expect(
      (
        await request(app)
          .post(url)
          .set(await as('chair'))
          .send({ password: DEMO_PASSWORD, reason: 'again' })
      ).status,
    ).toBe(409);
    expect((await outboxFor('decision.revoked', '')).length).toBeGreaterThan(0);
  });
});

describe('comments', () => {
  it('are open to the quality team, append-only, and audited', async () => {
    const post = await request(app)
      .post(`/api/runs/${runA}/comments`)
      .set(await as('steward'))
      .send({ body: 'The North annex extract was late this quarter.' });
    expect(post.status).toBe(201);
    expect(post.body.authorRole).toBe('steward');
    expect(
      (
        await request(app)
          .post(`/api/runs/${runA}/comments`)
          .set(await as('chair'))
          .send({ body: '' })
      ).status,
    ).toBe(400);
    const list = await request(app)
      .get(`/api/runs/${runA}/comments`)
      .set(await as('statistician'));
    expect(list.body.map((c: { body: string }) => c.body)).toContain('The North annex extract was late this quarter.');
    await refusedTwice(`UPDATE run_comments SET body = 'x' WHERE run_id = $1`, [runA], /append-only/);
    expect(
      (
        await request(app)
          .get(`/api/runs/${randomUUID()}/comments`)
          .set(await as('steward'))
      ).status,
    ).toBe(404);
  });
});

describe('validation report', () => {
  it('bundles score, cohort, methods, review, signature manifest and the TRIPOD checklist', async () => {
    const res = await request(app)
      .get(`/api/runs/${runA}/report`)
      .set(await as('statistician'));
    expect(res.status).toBe(200);
    expect(res.body.score.citation).toMatch(/fixture/i);
    expect(res.body.cohort.patients).toBe(50);
    expect(res.body.methods.find((m: { name: string }) => m.name.startsWith('Discrimination')).source).toMatch(
      /DeLong/,
    );
    expect(res.body.signatures.map((s: SignatureView) => s.meaning)).toEqual([
      'return to statistician',
      'approve for clinical use',
      'revoke approval',
    ]);
    const items = res.body.checklist as { code: string; present: boolean }[];
    expect(items.find((i) => i.code === '16')!.present).toBe(true);
    expect(items.find((i) => i.code === '22')!.present).toBe(false);
    expect(res.body.checklistSource).toMatch(/Collins GS.*2015.*BMJ 350:g7594/);
    expect(
      (
        await request(app)
          .get(`/api/runs/${runA}/report`)
          .set(await as('steward'))
      ).status,
    ).toBe(403);
  });
});

describe('the audit trail', () => {
  it('holds every act and its chain still verifies', async () => {
    const actions: { action: string }[] = await dataSource.query(
      `SELECT DISTINCT action FROM audit_log WHERE target_id = ANY($1)`,
      [[runA, runB, score.scoreVersionId]],
    );
    const names = actions.map((a) => a.action);
    for (const a of [
      'review.create',
      'review.revise',
      'signature.return',
      'signature.approve',
      'signature.revoke',
      'comment.create',
      'signature.password_failed',
    ]) {
      expect(names, a).toContain(a);
    }
    expect((await verifyAuditChain()).ok).toBe(true);
  });
});

describe('e-mail', () => {
  it('arrives at the local fake SMTP server, addressed by role', async () => {
    stopSmtp = await startFakeSmtp(config.smtp.port);
    clearReceived();
    await sendPendingOnce(500);
    const mails = receivedMessages();
    const awaiting = mails.find(
      (m) => m.subject.startsWith('Review awaiting sign-off') && m.to.includes('chair@demo.test'),
    );
    expect(awaiting).toBeDefined();
    expect(awaiting!.text).toMatch(/Verdict: /);
    const approved = mails.find((m) => m.subject.startsWith('Approved for clinical use'));
    expect(approved!.to).toEqual(expect.arrayContaining(['steward@demo.test', 'statistician@demo.test']));
    expect(approved!.text).toMatch(/Meaning of the signature: approve for clinical use/);
    const [{ n }] = await dataSource.query(
      `SELECT count(*)::int AS n FROM email_outbox WHERE status = 'pending' AND next_attempt_at <= now()`,
    );
    expect(n).toBe(0);
  });

  it('an SMTP outage keeps the message and retries it later', async () => {
    await stopSmtp!();
    stopSmtp = null;
    const subject = `Outage check ${randomUUID()}`;
    await queueEmail({
      to: ['statistician@demo.test'],
      subject,
      text: 'kept while the server is down',
      kind: 'test.outage',
    });
    const first = await sendPendingOnce(500);
    expect(first.retried).toBeGreaterThan(0);
    const [row] = await dataSource.query(
      `SELECT id, status, attempts, last_error FROM email_outbox WHERE subject = $1`,
      [subject],
    );
    expect(row.status).toBe('pending');
    expect(row.attempts).toBe(1);
    expect(row.last_error).toBeTruthy();
    stopSmtp = await startFakeSmtp(config.smtp.port);
    await dataSource.query(`UPDATE email_outbox SET next_attempt_at = now() WHERE id = $1`, [row.id]); // skip the backoff wait
    await sendPendingOnce(500);
    const [after] = await dataSource.query(`SELECT status, attempts FROM email_outbox WHERE id = $1`, [row.id]);
    expect(after).toEqual({ status: 'sent', attempts: 2 });
    expect(
      receivedMessages().some((m) => m.subject === subject && m.text.includes('kept while the server is down')),
    ).toBe(true);
  });

  it('the dev outbox page lists what arrived, for the admin only', async () => {
    const res = await request(app)
      .get('/api/dev/outbox')
      .set(await as('admin'));
    expect(res.status).toBe(200);
    expect(res.body.received.length).toBeGreaterThan(0);
    expect(res.body.outbox[0]).toHaveProperty('status');
    expect(
      (
        await request(app)
          .get('/api/dev/outbox')
          .set(await as('chair'))
      ).status,
    ).toBe(403);
  });

  it('each message has its mail job from the same transaction; the job sends it once, retries on failure, and gives up on its last try', async () => {
    const subject = `Mail job ${randomUUID()}`;
    await queueEmail({ to: ['statistician@demo.test'], subject, text: 'sent by its job', kind: 'test.job' });
    const [row] = await dataSource.query(`SELECT id FROM email_outbox WHERE subject = $1`, [subject]);
    const jobs = await dataSource.query(
      `SELECT count(*)::int AS n FROM pgboss.job WHERE name = 'mail' AND data->>'outboxId' = $1`,
      [row.id],
    );
    expect(jobs[0].n).toBe(1);
    const job = (retryCount: number) =>
      ({
        id: `test-${row.id}`,
        name: 'mail',
        data: { outboxId: row.id },
        retryCount,
        retryLimit: 7,
      }) as unknown as Parameters<JobHandler<{ outboxId: string }>>[0];
    clearReceived();
    await mailJob(job(0));
    expect(receivedMessages().filter((m) => m.subject === subject)).toHaveLength(1);
    await mailJob(job(1)); // a second delivery of the job finds the message sent
    expect(receivedMessages().filter((m) => m.subject === subject)).toHaveLength(1);

    await stopSmtp!();
    stopSmtp = null;
    const failing = `Mail job outage ${randomUUID()}`;
    await queueEmail({ to: ['statistician@demo.test'], subject: failing, text: 'not sent', kind: 'test.job' });
    const [f] = await dataSource.query(`SELECT id FROM email_outbox WHERE subject = $1`, [failing]);
    const jobF = (retryCount: number) =>
      ({
        id: `test-${f.id}`,
        name: 'mail',
        data: { outboxId: f.id },
        retryCount,
        retryLimit: 7,
      }) as unknown as Parameters<JobHandler<{ outboxId: string }>>[0];
    await expect(mailJob(jobF(0))).rejects.toThrow(/tries again/);
    expect(await dataSource.query(`SELECT status, attempts FROM email_outbox WHERE id = $1`, [f.id])).toEqual([
      { status: 'pending', attempts: 1 },
    ]);
    await mailJob(jobF(7)); // the last try: marked failed instead of thrown
    expect(await dataSource.query(`SELECT status, attempts FROM email_outbox WHERE id = $1`, [f.id])).toEqual([
      { status: 'failed', attempts: 2 },
    ]);
  });
});
