// The committee's record on a run: statistician reviews, chair signatures (approve / return / revoke),
// comments, and the chair's queue. Who may do what is decided here; the route table only pre-filters roles.
import { createHash, randomUUID } from 'node:crypto';
import { In, IsNull, type EntityManager } from 'typeorm';
import type {
  ApprovalView,
  CommentView,
  Decision,
  ReviewRequest,
  ReviewView,
  RunGovernanceView,
  SignatureMeaning,
  SignatureView,
  SignoffQueueItem,
} from '@shared/governance';
import { approvalNeedsReason, MEANING_OF_DECISION } from '@shared/governance';
import type { Role } from '@shared/roles';
import { config } from '../../platform/config';
import { dataSource } from '../../platform/database/dataSource';
import { RunComment } from '../../platform/database/entities/RunComment';
import { RunReview } from '../../platform/database/entities/RunReview';
import { ScoreComparison } from '../../platform/database/entities/ScoreComparison';
import { ScoreVersion } from '../../platform/database/entities/ScoreVersion';
import { Signature } from '../../platform/database/entities/Signature';
import { User } from '../../platform/database/entities/User';
import { ValidationRun } from '../../platform/database/entities/ValidationRun';
import type { AuthUser } from '../accounts/actor';
import { conflict, forbidden, invalid, notFound } from '../errors';
import { appendAudit, canonical } from '../accounts/audit';
import { queueEmail, recipientsForRole } from '../notifications/mail';
import { verifyPasswordFor } from '../accounts/users';
import { COHORT_LABEL_SQL, RUN_SCORE_COHORT_JOIN } from '../runs/runJoin';
import { checkComparisonForRun } from '../comparisons/reviewReference';

const DECISIVE: SignatureMeaning[] = ['approve for clinical use', 'return to statistician'];

const appUrl = () => config.publicUrl;

interface RunRow {
  id: string;
  status: string;
  score_version_id: string;
  results_sha256: string | null;
  score_name: string;
  score_version: number;
  cohort_label: string;
  clinical_status: string;
  approved_run_id: string | null;
}

const RUN_SQL = `
  SELECT r.id, r.status, r.score_version_id, r.results_sha256, s.name AS score_name, sv.version AS score_version,
         ${COHORT_LABEL_SQL} AS cohort_label,
         sv.clinical_status, sv.approved_run_id
  FROM ${RUN_SCORE_COHORT_JOIN}
  WHERE r.id = $1`;

/** Reads a run with its score and cohort names; `lock` serialises every governance act on that run. */
async function loadRun(m: EntityManager, runId: string, lock = false): Promise<RunRow> {
  const rows: RunRow[] = await m.query(RUN_SQL + (lock ? ' FOR UPDATE OF r' : ''), [runId]);
  if (!rows[0]) throw notFound('validation run');
  return rows[0];
}

const runTitle = (r: RunRow) => `${r.score_name} v${r.score_version} on ${r.cohort_label}`;

/** The score comparison a review relied on, as a signature seals it (its id and its results hash). */
export type SealedComparison = { id: string; resultsSha256: string | null } | null;

/**
 * What a signature is linked to, hashed (21 CFR 11.70): the run's results, the review (and the score comparison it
 * relied on), the signer, the meaning, the time. A review without a comparison hashes exactly as before comparisons
 * existed, so older signatures still verify.
 */
export function signatureHash(input: {
  runId: string;
  resultsSha256: string | null;
  scoreVersionId: string;
  reviewId: string | null;
  verdict: string | null;
  reasoning: string | null;
  meaning: SignatureMeaning;
  reason: string | null;
  signerId: string;
  printedName: string;
  role: string;
  signedAt: Date;
  revokesSignatureId: string | null;
  comparison: SealedComparison;
}): string {
  const { comparison, ...record } = input;
  const sealed = comparison ? { comparisonId: comparison.id, comparisonResultsSha256: comparison.resultsSha256 } : {};
  return createHash('sha256')
    .update(canonical({ ...record, ...sealed, signedAt: input.signedAt.toISOString() }))
    .digest('hex');
}

/** The comparison a review names (id and results hash), read where the signature is made or checked. */
async function reviewComparison(m: EntityManager, comparisonId: string | null): Promise<SealedComparison> {
  if (!comparisonId) return null;
  const c = await m
    .getRepository(ScoreComparison)
    .findOne({ select: { id: true, resultsSha256: true }, where: { id: comparisonId } });
  return { id: comparisonId, resultsSha256: c?.resultsSha256 ?? null };
}

// ---------- reading ----------

interface ReviewRow {
  id: string;
  run_id: string;
  verdict: ReviewView['verdict'];
  reasoning: string;
  reviewer_id: string;
  reviewer_name: string;
  created_at: Date;
  superseded_by: string | null;
  comparison_id: string | null;
  decision: SignatureMeaning | null;
  closed_by_id: string | null;
  closed_at: Date | null;
}

// The revocation that closed a review: of the review's score version, signed after the review was written, while no
// chair had decided the review (both times from the database clock). One lateral join for the review list and the queue.
const CLOSED_BY_SQL = `
  LEFT JOIN LATERAL (
    SELECT s.id AS closed_by_id, s.signed_at AS closed_at FROM signatures s
    JOIN validation_runs vr ON vr.id = rv.run_id
    WHERE s.meaning = 'revoke approval' AND s.score_version_id = vr.score_version_id AND s.signed_at >= date_trunc('milliseconds', rv.created_at)
      AND NOT EXISTS (SELECT 1 FROM signatures d WHERE d.review_id = rv.id AND d.meaning IN ('approve for clinical use', 'return to statistician'))
    ORDER BY s.signed_at ASC LIMIT 1
  ) closing ON true`;

export async function listReviews(runId: string, m: EntityManager = dataSource.manager): Promise<ReviewView[]> {
  const rows: ReviewRow[] = await m.query(
    `SELECT rv.*, u.name AS reviewer_name, closing.closed_by_id, closing.closed_at,
            (SELECT s.meaning FROM signatures s WHERE s.review_id = rv.id AND s.meaning = ANY($2) LIMIT 1) AS decision
     FROM run_reviews rv JOIN users u ON u.id = rv.reviewer_id ${CLOSED_BY_SQL}
     WHERE rv.run_id = $1 ORDER BY rv.created_at ASC, rv.id`,
    [runId, DECISIVE],
  );
  return rows.map((r) => ({
    id: r.id,
    runId: r.run_id,
    verdict: r.verdict,
    reasoning: r.reasoning,
    reviewerId: r.reviewer_id,
    reviewerName: r.reviewer_name,
    createdAt: new Date(r.created_at).toISOString(),
    supersededBy: r.superseded_by,
    comparisonId: r.comparison_id ?? null,
    current: r.superseded_by === null,
    decision: r.decision,
    closedBy: r.closed_by_id ? { signatureId: r.closed_by_id, signedAt: new Date(r.closed_at!).toISOString() } : null,
  }));
}

interface SignatureRow {
  id: string;
  run_id: string;
  score_version_id: string;
  review_id: string | null;
  signer_id: string;
  printed_name: string;
  role: string;
  meaning: SignatureMeaning;
  reason: string | null;
  signed_at: Date;
  record_sha256: string;
  revokes_signature_id: string | null;
  results_sha256: string | null;
  comparison_id: string | null;
  comparison_results_sha256: string | null;
  verdict: ReviewView['verdict'] | null;
  reasoning: string | null;
}

/** The signature manifest of a run, each with its link to the record re-checked. */
export async function listSignatures(runId: string, m: EntityManager = dataSource.manager): Promise<SignatureView[]> {
  const rows: SignatureRow[] = await m.query(
    `SELECT s.*, r.results_sha256, rv.verdict, rv.reasoning, rv.comparison_id, sc.results_sha256 AS comparison_results_sha256
     FROM signatures s JOIN validation_runs r ON r.id = s.run_id LEFT JOIN run_reviews rv ON rv.id = s.review_id
     LEFT JOIN score_comparisons sc ON sc.id = rv.comparison_id
     WHERE s.run_id = $1 ORDER BY s.signed_at ASC, s.id`,
    [runId],
  );
  return rows.map((s) => {
    const signedAt = new Date(s.signed_at);
    const expected = signatureHash({
      runId: s.run_id,
      resultsSha256: s.results_sha256,
      scoreVersionId: s.score_version_id,
      reviewId: s.review_id,
      verdict: s.verdict,
      reasoning: s.reasoning,
      meaning: s.meaning,
      reason: s.reason,
      signerId: s.signer_id,
      printedName: s.printed_name,
      role: s.role,
      signedAt,
      revokesSignatureId: s.revokes_signature_id,
      comparison: s.comparison_id ? { id: s.comparison_id, resultsSha256: s.comparison_results_sha256 } : null,
    });
    return {
      id: s.id,
      runId: s.run_id,
      reviewId: s.review_id,
      scoreVersionId: s.score_version_id,
      signerId: s.signer_id,
      printedName: s.printed_name,
      role: s.role,
      meaning: s.meaning,
      reason: s.reason,
      reviewVerdict: s.verdict,
      signedAt: signedAt.toISOString(),
      recordSha256: s.record_sha256,
      linkVerified: expected === s.record_sha256,
      revokesSignatureId: s.revokes_signature_id,
    };
  });
}

/** Which run of its score version carries the approval (numbered by creation within the version), on which cohort, signed when. */
async function approvalOf(m: EntityManager, approvedRunId: string): Promise<ApprovalView | null> {
  const rows: { run_number: string; cohort_label: string; signed_at: Date | null }[] = await m.query(
    `SELECT (SELECT count(*) FROM validation_runs x WHERE x.score_version_id = r.score_version_id AND (x.created_at, x.id) <= (r.created_at, r.id)) AS run_number,
            ${COHORT_LABEL_SQL} AS cohort_label,
            (SELECT max(s.signed_at) FROM signatures s WHERE s.run_id = r.id AND s.meaning = 'approve for clinical use') AS signed_at
     FROM validation_runs r JOIN cohort_versions cv ON cv.id = r.cohort_version_id JOIN cohorts c ON c.id = cv.cohort_id
     WHERE r.id = $1`,
    [approvedRunId],
  );
  const a = rows[0];
  if (!a) return null;
  return {
    runId: approvedRunId,
    runNumber: Number(a.run_number),
    cohortLabel: a.cohort_label,
    signedAt: a.signed_at ? new Date(a.signed_at).toISOString() : null,
  };
}

/** Reviews, signatures and what the signed-in account may do next on this run. */
export async function getRunGovernance(actor: AuthUser, runId: string): Promise<RunGovernanceView> {
  const m = dataSource.manager;
  const run = await loadRun(m, runId);
  const reviews = await listReviews(runId, m);
  const signatures = await listSignatures(runId, m);
  const current = reviews.find((r) => r.current) ?? null;
  const approvedHere = signatures.some((s) => s.meaning === 'approve for clinical use');
  let reasonCannotSign: string | null = null;
  if (actor.role !== 'chair') reasonCannotSign = 'only the committee chair signs';
  else if (!current) reasonCannotSign = 'the run has no review yet';
  else if (current.decision) reasonCannotSign = `the current review was already signed (${current.decision})`;
  else if (current.closedBy)
    reasonCannotSign =
      'the approval of this score version was revoked after this review was written; the statistician reviews the run again first';
  else if (reviews.some((r) => r.reviewerId === actor.id))
    reasonCannotSign = 'you reviewed this run, so another chair must sign it';
  return {
    runId,
    runStatus: run.status,
    scoreVersionId: run.score_version_id,
    clinicalStatus: run.clinical_status,
    approvedRunId: run.approved_run_id,
    approval: run.approved_run_id ? await approvalOf(m, run.approved_run_id) : null,
    reviews,
    signatures,
    can: {
      review: actor.role === 'statistician' && run.status === 'completed' && !approvedHere,
      sign: reasonCannotSign === null,
      revoke: actor.role === 'chair' && run.clinical_status === 'approved' && run.approved_run_id === runId,
      comment: actor.role !== 'clinician',
    },
    reasonCannotSign,
  };
}

// ---------- review ----------

/** Records the statistician's verdict; a second review on the same run supersedes the first, which stays visible. */
export async function reviewRun(actor: AuthUser, runId: string, input: ReviewRequest, ip: string): Promise<ReviewView> {
  if (actor.role !== 'statistician') throw forbidden('only a statistician writes the review');
  const reviewId = await dataSource.transaction(async (m) => {
    const run = await loadRun(m, runId, true);
    if (run.status !== 'completed') throw conflict(`the run is ${run.status}; only a completed run can be reviewed`);
    const approved = await m.getRepository(Signature).exists({ where: { runId, meaning: 'approve for clinical use' } });
    if (approved)
      throw conflict('this run was approved for clinical use; its record is closed — start a new run to review again');
    const current = await m.getRepository(RunReview).findOne({ where: { runId, supersededBy: IsNull() } });
    const comparisonId = input.comparisonId ? await checkComparisonForRun(m, runId, input.comparisonId) : null;
    const id = randomUUID();
    // The old review points at its successor first (the link is deferred), keeping one current review per run.
    if (current) await m.getRepository(RunReview).update(current.id, { supersededBy: id });
    await m.insert(RunReview, {
      id,
      runId,
      verdict: input.verdict,
      reasoning: input.reasoning,
      reviewerId: actor.id,
      comparisonId,
    } as never);
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: current ? 'review.revise' : 'review.create',
        targetType: 'validation_run',
        targetId: runId,
        sourceIp: ip,
        details: { reviewId: id, verdict: input.verdict, supersedes: current?.id ?? null, comparisonId },
      },
      m,
    );
    await queueEmail(
      {
        to: await recipientsForRole('chair', m),
        subject: `Review awaiting sign-off: ${runTitle(run)}`,
        kind: 'review.awaiting_signoff',
        text: [
          `${actor.name} (statistician) ${current ? 'revised the review of' : 'reviewed'} the validation run of ${runTitle(run)}.`,
          `Verdict: ${input.verdict}.`,
          '',
          `The run awaits the committee's decision: ${appUrl()}/runs/${runId}`,
          '',
          'Plumbline — a statistical check of past local performance; not medical advice.',
        ].join('\n'),
      },
      m,
    );
    return id;
  });
  return (await listReviews(runId)).find((r) => r.id === reviewId)!;
}

// ---------- signatures ----------

/** The signer's password, re-entered: limited and audited like sign-in (users.verifyPasswordFor). */
async function reauthenticate(
  actor: AuthUser,
  password: string,
  act: string,
  targetType: string,
  targetId: string,
  ip: string,
) {
  await verifyPasswordFor(
    actor,
    password,
    { action: 'signature', targetType, targetId, ip, details: { act } },
    'the password is not correct; the signature was not recorded',
  );
}

const isUniqueViolation = (err: unknown) =>
  (err as { code?: string; driverError?: { code?: string } }).code === '23505' ||
  (err as { driverError?: { code?: string } }).driverError?.code === '23505';

async function notifyDecision(m: EntityManager, subject: string, text: string[], kind: string) {
  const to = [...(await recipientsForRole('steward', m)), ...(await recipientsForRole('statistician', m))];
  await queueEmail(
    {
      to,
      subject,
      kind,
      text: [...text, '', 'Plumbline — a statistical check of past local performance; not medical advice.'].join('\n'),
    },
    m,
  );
}

/** The chair approves the run's score version for clinical use, or returns the run to the statistician. */
export async function signoffRun(
  actor: AuthUser,
  runId: string,
  input: { decision: Decision; password: string; reason?: string },
  ip: string,
): Promise<SignatureView> {
  if (actor.role !== 'chair') throw forbidden('only the committee chair signs');
  await reauthenticate(actor, input.password, `signoff.${input.decision}`, 'validation_run', runId, ip);
  const meaning = MEANING_OF_DECISION[input.decision];
  const reason = input.reason?.trim() || null;
  if (input.decision === 'return' && !reason) throw invalid('a return needs a reason');
  let signatureId: string;
  try {
    signatureId = await dataSource.transaction(async (m) => {
      // Every signature on a score version waits for the version's row first (as a revocation does), then for the run:
      // two chairs signing at once, or a sign-off during a revocation, go one after the other in that order.
      const unlocked = await m
        .getRepository(ValidationRun)
        .findOne({ select: { id: true, scoreVersionId: true }, where: { id: runId } });
      if (!unlocked) throw notFound('validation run');
      await m.getRepository(ScoreVersion).findOne({
        select: { id: true },
        where: { id: unlocked.scoreVersionId },
        lock: { mode: 'pessimistic_write' },
      });
      const run = await loadRun(m, runId, true);
      if (run.status !== 'completed')
        throw conflict(`the run is ${run.status}; only a completed, reviewed run can be signed`);
      const current = await m.getRepository(RunReview).findOne({ where: { runId, supersededBy: IsNull() } });
      if (!current) throw conflict('the run has no review yet; the statistician reviews before the chair signs');
      const reviewed = await m.getRepository(RunReview).exists({ where: { runId, reviewerId: actor.id } });
      if (reviewed) throw forbidden('you reviewed this run, so another chair must sign it');
      const decided = await m
        .getRepository(Signature)
        .find({ select: { id: true, meaning: true }, where: { reviewId: current.id, meaning: In(DECISIVE) } });
      if (decided.length) throw conflict(`this review was already signed (${decided[0].meaning})`);
      const [closing]: { id: string }[] = await m.query(
        `SELECT s.id FROM signatures s JOIN run_reviews rv ON rv.id = $2
         WHERE s.meaning = 'revoke approval' AND s.score_version_id = $1 AND s.signed_at >= date_trunc('milliseconds', rv.created_at)`,
        [run.score_version_id, current.id],
      );
      if (closing)
        throw conflict(
          'the approval of this score version was revoked after this review was written, which closed it; the statistician reviews the run again first',
        );
      if (input.decision === 'approve' && approvalNeedsReason(current.verdict) && !reason) {
        throw invalid(`the review says "${current.verdict}": approving against it needs your written reason`);
      }

      const signedAt = new Date(Math.floor(Date.now()));
      const id = randomUUID();
      const record = {
        runId,
        resultsSha256: run.results_sha256,
        scoreVersionId: run.score_version_id,
        reviewId: current.id,
        verdict: current.verdict,
        reasoning: current.reasoning,
        meaning,
        reason,
        signerId: actor.id,
        printedName: actor.name,
        role: actor.role,
        signedAt,
        revokesSignatureId: null,
        comparison: await reviewComparison(m, current.comparisonId),
      };
      await m.insert(Signature, {
        id,
        runId,
        scoreVersionId: run.score_version_id,
        reviewId: current.id,
        signerId: actor.id,
        printedName: actor.name,
        role: actor.role,
        meaning,
        reason,
        signedAt,
        recordSha256: signatureHash(record),
        revokesSignatureId: null,
      } as never);
      if (input.decision === 'approve') {
        await m
          .getRepository(ScoreVersion)
          .update(run.score_version_id, { clinicalStatus: 'approved', approvedRunId: runId });
      }
      await appendAudit(
        {
          actorId: actor.id,
          actorEmail: actor.email,
          action: input.decision === 'approve' ? 'signature.approve' : 'signature.return',
          targetType: 'validation_run',
          targetId: runId,
          sourceIp: ip,
          details: {
            signatureId: id,
            reviewId: current.id,
            meaning,
            reason,
            scoreVersionId: run.score_version_id,
            signedAt: signedAt.toISOString(),
          },
        },
        m,
      );
      await notifyDecision(
        m,
        input.decision === 'approve'
          ? `Approved for clinical use: ${runTitle(run)}`
          : `Returned to the statistician: ${runTitle(run)}`,
        [
          `${actor.name} (committee chair) signed the validation run of ${runTitle(run)}.`,
          `Meaning of the signature: ${meaning}.`,
          ...(reason ? [`Reason: ${reason}`] : []),
          `Signed at ${signedAt.toISOString()} (UTC).`,
          '',
          `${appUrl()}/runs/${runId}`,
        ],
        input.decision === 'approve' ? 'decision.approved' : 'decision.returned',
      );
      return id;
    });
  } catch (err) {
    // The unique index on decisive signatures is the last guard against a simultaneous second decision.
    if (isUniqueViolation(err)) throw conflict('this review was already signed by another chair');
    throw err;
  }
  return (await listSignatures(runId)).find((s) => s.id === signatureId)!;
}

/** Withdraws a score version's approval: a signed act with a reason, linked to the approval it revokes. */
export async function revokeApproval(
  actor: AuthUser,
  versionId: string,
  input: { password: string; reason: string },
  ip: string,
): Promise<SignatureView> {
  if (actor.role !== 'chair') throw forbidden('only the committee chair revokes an approval');
  await reauthenticate(actor, input.password, 'revoke', 'score_version', versionId, ip);
  let result: { id: string; runId: string };
  try {
    result = await dataSource.transaction(async (m) => {
      const version = await m.getRepository(ScoreVersion).findOne({
        select: { id: true, clinicalStatus: true, approvedRunId: true },
        where: { id: versionId },
        lock: { mode: 'pessimistic_write' },
      });
      if (!version) throw notFound('score version');
      if (version.clinicalStatus !== 'approved' || !version.approvedRunId)
        throw conflict(`the score version is ${version.clinicalStatus}; only an approved version can be revoked`);
      const run = await loadRun(m, version.approvedRunId, true);
      const approvals: Signature[] = await m
        .getRepository(Signature)
        .find({ where: { runId: run.id, meaning: 'approve for clinical use' }, order: { signedAt: 'DESC' }, take: 1 });
      const approval = approvals[0];
      if (!approval) throw conflict('no approval signature was found for this version');
      const review = approval.reviewId
        ? await m.getRepository(RunReview).findOne({ where: { id: approval.reviewId } })
        : null;
      // The database clock, the one that dates reviews: every review written before this moment is closed (CLOSED_BY_SQL).
      const [{ at: signedAt }]: { at: Date }[] = await m.query(
        `SELECT date_trunc('milliseconds', clock_timestamp()) AS at`,
      );
      const closes: { id: string; run_id: string }[] = await m.query(
        `SELECT rv.id, rv.run_id FROM run_reviews rv JOIN validation_runs vr ON vr.id = rv.run_id
         WHERE vr.score_version_id = $1 AND rv.superseded_by IS NULL AND date_trunc('milliseconds', rv.created_at) <= $2
           AND NOT EXISTS (SELECT 1 FROM signatures d WHERE d.review_id = rv.id AND d.meaning = ANY($3))`,
        [versionId, signedAt, DECISIVE],
      );
      const id = randomUUID();
      const meaning: SignatureMeaning = 'revoke approval';
      const record = {
        runId: run.id,
        resultsSha256: run.results_sha256,
        scoreVersionId: versionId,
        reviewId: approval.reviewId,
        verdict: review?.verdict ?? null,
        reasoning: review?.reasoning ?? null,
        meaning,
        reason: input.reason,
        signerId: actor.id,
        printedName: actor.name,
        role: actor.role,
        signedAt,
        revokesSignatureId: approval.id,
        comparison: await reviewComparison(m, review?.comparisonId ?? null),
      };
      await m.insert(Signature, {
        id,
        runId: run.id,
        scoreVersionId: versionId,
        reviewId: approval.reviewId,
        signerId: actor.id,
        printedName: actor.name,
        role: actor.role,
        meaning,
        reason: input.reason,
        signedAt,
        recordSha256: signatureHash(record),
        revokesSignatureId: approval.id,
      } as never);
      await m.getRepository(ScoreVersion).update(versionId, { clinicalStatus: 'revoked' });
      await appendAudit(
        {
          actorId: actor.id,
          actorEmail: actor.email,
          action: 'signature.revoke',
          targetType: 'score_version',
          targetId: versionId,
          sourceIp: ip,
          details: {
            signatureId: id,
            revokes: approval.id,
            runId: run.id,
            reason: input.reason,
            signedAt: signedAt.toISOString(),
            closesReviews: closes.map((c) => c.id),
          },
        },
        m,
      );
      await notifyDecision(
        m,
        `Approval revoked: ${run.score_name} v${run.score_version}`,
        [
          `${actor.name} (committee chair) revoked the clinical-use approval of ${run.score_name} v${run.score_version}.`,
          `Reason: ${input.reason}`,
          `Signed at ${signedAt.toISOString()} (UTC). Clinicians no longer see its score card.`,
          ...(closes.length
            ? [
                `${closes.length} review(s) of this version awaiting a decision were closed; a new review is needed before any sign-off.`,
              ]
            : []),
          '',
          `${appUrl()}/runs/${run.id}`,
        ],
        'decision.revoked',
      );
      return { id, runId: run.id };
    });
  } catch (err) {
    if (isUniqueViolation(err)) throw conflict('this approval was already revoked');
    throw err;
  }
  return (await listSignatures(result.runId)).find((s) => s.id === result.id)!;
}

// ---------- comments ----------

export async function listComments(runId: string): Promise<CommentView[]> {
  await loadRun(dataSource.manager, runId);
  const rows: {
    id: string;
    run_id: string;
    author_id: string;
    author_name: string;
    author_role: Role;
    body: string;
    created_at: Date;
  }[] = await dataSource
    .getRepository(RunComment)
    .createQueryBuilder('c')
    .innerJoin(User, 'u', 'u.id = c.authorId')
    .select('c.id', 'id')
    .addSelect('c.runId', 'run_id')
    .addSelect('c.authorId', 'author_id')
    .addSelect('u.name', 'author_name')
    .addSelect('u.role', 'author_role')
    .addSelect('c.body', 'body')
    .addSelect('c.createdAt', 'created_at')
    .where('c.runId = :runId', { runId })
    .orderBy('c.createdAt', 'ASC')
    .addOrderBy('c.id', 'ASC')
    .getRawMany();
  return rows.map((c) => ({
    id: c.id,
    runId: c.run_id,
    authorId: c.author_id,
    authorName: c.author_name,
    authorRole: c.author_role,
    body: c.body,
    createdAt: new Date(c.created_at).toISOString(),
  }));
}

export async function addComment(actor: AuthUser, runId: string, body: string, ip: string): Promise<CommentView> {
  if (actor.role === 'clinician')
    throw forbidden('clinicians read score cards; the run discussion is for the quality team');
  const id = await dataSource.transaction(async (m) => {
    await loadRun(m, runId);
    const id = randomUUID();
    await m.insert(RunComment, { id, runId, authorId: actor.id, body } as never);
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'comment.create',
        targetType: 'validation_run',
        targetId: runId,
        sourceIp: ip,
        details: { commentId: id, length: body.length },
      },
      m,
    );
    return id;
  });
  return (await listComments(runId)).find((c) => c.id === id)!;
}

// ---------- the chair's queue ----------

/** Current reviews on completed runs that no chair has decided yet, oldest first. */
export async function signoffQueue(actor: AuthUser): Promise<SignoffQueueItem[]> {
  const rows: {
    run_id: string;
    review_id: string;
    score_name: string;
    score_version: number;
    score_version_id: string;
    cohort_label: string;
    verdict: SignoffQueueItem['verdict'];
    reviewer_name: string;
    reviewed_at: Date;
    own_review: boolean;
  }[] = await dataSource.query(
    `SELECT r.id AS run_id, rv.id AS review_id, s.name AS score_name, sv.version AS score_version, sv.id AS score_version_id,
            ${COHORT_LABEL_SQL} AS cohort_label,
            rv.verdict, u.name AS reviewer_name, rv.created_at AS reviewed_at,
            EXISTS (SELECT 1 FROM run_reviews o WHERE o.run_id = r.id AND o.reviewer_id = $1) AS own_review
     FROM ${RUN_SCORE_COHORT_JOIN}
     JOIN run_reviews rv ON rv.run_id = r.id
     JOIN users u ON u.id = rv.reviewer_id ${CLOSED_BY_SQL}
     WHERE rv.superseded_by IS NULL AND r.status = 'completed' AND closing.closed_by_id IS NULL
       AND NOT EXISTS (SELECT 1 FROM signatures sg WHERE sg.review_id = rv.id AND sg.meaning = ANY($2))
     ORDER BY rv.created_at ASC`,
    [actor.id, DECISIVE],
  );
  return rows.map((r) => ({
    runId: r.run_id,
    reviewId: r.review_id,
    scoreName: r.score_name,
    scoreVersion: r.score_version,
    scoreVersionId: r.score_version_id,
    cohortLabel: r.cohort_label,
    verdict: r.verdict,
    reviewerName: r.reviewer_name,
    reviewedAt: new Date(r.reviewed_at).toISOString(),
    ownReview: r.own_review,
  }));
}
