// Review, sign-off, comments and score cards: the request schemas and the shapes both sides read.
import { z } from 'zod';
import type { CompletedScoreComparison } from './scoreComparison';

export const VERDICTS = ['fit for use', 'recalibrate first', 'not fit for use'] as const;
export type Verdict = (typeof VERDICTS)[number];

/** What a signature means, stated before signing and printed with it (21 CFR 11.50(a)(3)). */
export const SIGNATURE_MEANINGS = ['approve for clinical use', 'return to statistician', 'revoke approval'] as const;
export type SignatureMeaning = (typeof SIGNATURE_MEANINGS)[number];

export const DECISIONS = ['approve', 'return'] as const;
export type Decision = (typeof DECISIONS)[number];
export const MEANING_OF_DECISION: Record<Decision, SignatureMeaning> = {
  approve: 'approve for clinical use',
  return: 'return to statistician',
};

/** Verdicts against which an approval needs the chair's written reason (stored with the signature, in the manifest). */
export const NEGATIVE_VERDICTS: readonly Verdict[] = ['not fit for use', 'recalibrate first'];
export const approvalNeedsReason = (verdict: Verdict | null | undefined) =>
  !!verdict && NEGATIVE_VERDICTS.includes(verdict);

export const reviewRequest = z.object({
  verdict: z.enum(VERDICTS),
  reasoning: z.string().trim().min(1, 'reasoning is required').max(20_000),
  /** The score comparison (shared/src/scoreComparison.ts) the review relied on, if any. */
  comparisonId: z.uuid().optional(),
});
export type ReviewRequest = z.infer<typeof reviewRequest>;

export const signoffRequest = z
  .object({
    decision: z.enum(DECISIONS),
    password: z.string().min(1, 're-enter your password to sign').max(200),
    reason: z.string().trim().max(5_000).optional(),
  })
  .refine((v) => v.decision !== 'return' || (v.reason !== undefined && v.reason.length > 0), {
    message: 'a return needs a reason',
    path: ['reason'],
  });
export type SignoffRequest = z.infer<typeof signoffRequest>;

export const revokeRequest = z.object({
  password: z.string().min(1, 're-enter your password to sign').max(200),
  reason: z.string().trim().min(1, 'a revocation needs a reason').max(5_000),
});
export type RevokeRequest = z.infer<typeof revokeRequest>;

export const commentRequest = z.object({ body: z.string().trim().min(1, 'the comment is empty').max(10_000) });
export type CommentRequest = z.infer<typeof commentRequest>;

export const versionIdParam = z.object({ versionId: z.string().uuid('versionId must be a UUID') });

export interface ReviewView {
  id: string;
  runId: string;
  verdict: Verdict;
  reasoning: string;
  reviewerId: string;
  reviewerName: string;
  createdAt: string;
  supersededBy: string | null;
  /** The score comparison this review relied on, if it names one. */
  comparisonId?: string | null;
  current: boolean;
  /** The decisive signature on this review, if any. */
  decision: SignatureMeaning | null;
  /** The revocation that closed this review while it awaited a decision: it can no longer be signed. */
  closedBy: { signatureId: string; signedAt: string } | null;
}

export interface SignatureView {
  id: string;
  runId: string;
  reviewId: string | null;
  scoreVersionId: string;
  signerId: string;
  printedName: string;
  role: string;
  meaning: SignatureMeaning;
  reason: string | null;
  /** The verdict of the review this signature decided (an approval against a negative one carries a reason). */
  reviewVerdict: Verdict | null;
  signedAt: string; // ISO 8601, UTC
  recordSha256: string;
  /** The hash recomputed from the linked record matches the stored one (21 CFR 11.70). */
  linkVerified: boolean;
  revokesSignatureId: string | null;
}

export interface CommentView {
  id: string;
  runId: string;
  authorId: string;
  authorName: string;
  authorRole: string;
  body: string;
  createdAt: string;
}

export interface ApprovalView {
  runId: string;
  /** 1 for the first run of the score version, in the order runs were started. */
  runNumber: number;
  cohortLabel: string;
  signedAt: string | null;
}

export interface RunGovernanceView {
  runId: string;
  runStatus: string;
  scoreVersionId: string;
  clinicalStatus: string;
  approvedRunId: string | null;
  /** The run the score version's approval rests on (any run of the version, not necessarily this one). */
  approval: ApprovalView | null;
  reviews: ReviewView[];
  signatures: SignatureView[];
  /** What may happen next, for the signed-in account (the server checks again on every request). */
  can: { review: boolean; sign: boolean; revoke: boolean; comment: boolean };
  reasonCannotSign: string | null;
}

export interface SignoffQueueItem {
  runId: string;
  reviewId: string;
  scoreName: string;
  scoreVersion: number;
  scoreVersionId: string;
  cohortLabel: string;
  verdict: Verdict;
  reviewerName: string;
  reviewedAt: string;
  /** The signed-in chair wrote a review on this run and so may not sign it. */
  ownReview: boolean;
}

export interface IntervalView {
  estimate: number;
  lower: number;
  upper: number;
}

export interface ScoreCardView {
  scoreVersionId: string;
  scoreName: string;
  version: number;
  predicts: string;
  horizon: string;
  forWhom: string;
  citation: string;
  inputs: { name: string; how: string }[];
  caution: string;
  validation: {
    runId: string;
    cohortLabel: string;
    periodStart: string | null;
    periodEnd: string | null;
    patients: number;
    events: number;
    auc: IntervalView | null;
    calibrationIntercept: IntervalView | null;
    calibrationSlope: IntervalView | null;
    oe: IntervalView | null;
    /** The numbers in plain words, one sentence each. */
    plainWords: string[];
  } | null;
  approval: { printedName: string; role: string; signedAt: string } | null;
}

export interface ChecklistItem {
  code: string;
  topic: string;
  /** The item in our own words. */
  item: string;
  present: boolean;
  where: string;
  /** The report parts (shared/src/report.ts) that answer the item; none for what Plumbline does not record. */
  parts: string[];
}

export interface MethodNote {
  name: string;
  how: string;
  source: string;
}

export interface RunReport {
  generatedAt: string;
  run: {
    id: string;
    status: string;
    engineVersion: string | null;
    settings: unknown;
    inputsSha256: string | null;
    resultsSha256: string | null;
    createdAt: string | null;
    completedAt: string | null;
  };
  score: {
    name: string;
    version: number;
    mode: string;
    citation: string;
    predicts: string;
    horizon: string;
    forWhom: string;
    inputs: { name: string; how: string }[];
    intercept: number | null;
    clinicalStatus: string;
    /** The run this version was recalibrated from, when it is an update. */
    derivedFromRunId: string | null;
  };
  cohort: {
    label: string;
    description: string;
    periodStart: string | null;
    periodEnd: string | null;
    patients: number;
    events: number;
    excluded: number;
    sourceFilename: string;
    sourceSha256: string;
  };
  results: unknown;
  methods: MethodNote[];
  reviews: ReviewView[];
  signatures: SignatureView[];
  /** The score comparison a review of this run relied on (the current review's, else the latest naming one). */
  comparison?: CompletedScoreComparison | null;
  checklist: ChecklistItem[];
  checklistSource: string;
}

export interface OutboxRow {
  id: string;
  to: string[];
  subject: string;
  kind: string;
  status: string;
  attempts: number;
  lastError: string | null;
  createdAt: string;
  sentAt: string | null;
}

export interface ReceivedMail {
  id: number;
  receivedAt: string;
  from: string;
  to: string[];
  subject: string;
  text: string;
}
