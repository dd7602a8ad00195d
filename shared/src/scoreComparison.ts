// Two score versions head to head on the same patients (one cohort version): the request, the settings, the stored
// results and the API shapes. Not to be confused with GET /api/runs/compare, which sets the headline figures of two
// separate runs side by side without pairing patients.
import { z } from 'zod';
import { DEFAULT_NET_BENEFIT_THRESHOLDS } from './runs';
import type { Estimate, ValidationResult } from './validation';

const probability = z.number().finite().gt(0, 'a threshold must be above 0').lt(1, 'a threshold must be below 1');

export const scoreComparisonSettingsSchema = z
  .object({
    netBenefitThresholds: z
      .array(probability)
      .min(2)
      .max(200)
      .default(DEFAULT_NET_BENEFIT_THRESHOLDS)
      .refine(
        (xs) => xs.every((x, i) => i === 0 || x > xs[i - 1]),
        'net-benefit thresholds must ascend without repeats',
      ),
    /** Paired bootstrap replicates for the net-benefit differences; 0 gives the differences without intervals. */
    bootstrapReplicates: z.number().int().min(0).max(2000).default(500),
    bootstrapSeed: z
      .number()
      .int()
      .min(0)
      .max(2 ** 31 - 1)
      .default(20_260_101),
    loessSpan: z.number().finite().gt(0.1, 'loessSpan must be above 0.1').max(1).default(0.75),
    calibrationGroups: z.number().int().min(2).max(50).default(10),
  })
  .strict();
export type ScoreComparisonSettings = z.infer<typeof scoreComparisonSettingsSchema>;

export const createScoreComparisonRequest = z
  .object({
    firstScoreVersionId: z.uuid(),
    secondScoreVersionId: z.uuid(),
    cohortVersionId: z.uuid(),
    settings: scoreComparisonSettingsSchema.default(() => scoreComparisonSettingsSchema.parse({})),
  })
  .strict()
  .refine((b) => b.firstScoreVersionId !== b.secondScoreVersionId, {
    message: 'choose two different score versions',
    path: ['secondScoreVersionId'],
  });
export type CreateScoreComparisonRequest = z.input<typeof createScoreComparisonRequest>;

/** A comparison is computed by a job: queued, running, then completed (with results) or failed (with its reason). */
export const SCORE_COMPARISON_STATUSES = ['queued', 'running', 'completed', 'failed'] as const;
export type ScoreComparisonStatus = (typeof SCORE_COMPARISON_STATUSES)[number];

/** GET /api/comparisons/:id?waitSeconds=N: while it waits or computes, answer when it ends or after N s. */
export const scoreComparisonQuery = z.object({ waitSeconds: z.coerce.number().int().min(0).max(30).default(0) });

export const scoreComparisonListQuery = z.object({
  scoreVersion: z.uuid().optional(),
  cohortVersion: z.uuid().optional(),
  limit: z.coerce.number().int().min(1).max(200).default(50),
  offset: z.coerce.number().int().min(0).default(0),
});
export type ScoreComparisonListQuery = z.infer<typeof scoreComparisonListQuery>;

/** An interval whose ends are null where the bootstrap was off (stored JSON has no NaN). */
export interface StoredDifference {
  estimate: number;
  lower: number | null;
  upper: number | null;
}

/** One score's own figures on the compared patients (no bootstrap: the paired parts carry the intervals). */
export interface ComparedScoreFigures {
  auc: Estimate;
  calibrationIntercept: Estimate | null;
  calibrationSlope: Estimate | null;
  oe: Estimate | null;
  brier: number | null;
  ici: number | null;
  calibrationCurve: ValidationResult['calibrationCurve'];
  warnings: string[];
}

/** What a comparison stores: the paired AUC test, the net-benefit differences and each score's own figures. */
export interface ScoreComparisonResults {
  engineVersion: string;
  n: number;
  events: number;
  auc: {
    first: number;
    second: number;
    /** first − second, with the Wald 95% CI of the paired DeLong variance. */
    difference: Estimate;
    se: number;
    z: number;
    pValue: number;
    method: string;
  };
  netBenefit: { threshold: number; first: number; second: number; difference: StoredDifference }[];
  /** Net benefit of treating everyone, per threshold (the same for both scores). */
  treatAll: number[];
  bootstrap: { replicates: number; seed: number; method: string } | null;
  first: ComparedScoreFigures;
  second: ComparedScoreFigures;
}

export interface ComparedScoreVersion {
  scoreVersionId: string;
  scoreId: string;
  scoreName: string;
  version: number;
}

export interface ScoreComparisonSummary {
  id: string;
  first: ComparedScoreVersion;
  second: ComparedScoreVersion;
  cohortId: string;
  cohortName: string;
  cohortVersionId: string;
  cohortVersion: number;
  cohortLabel: string;
  status: ScoreComparisonStatus;
  /** 0..1 while it waits or computes; 1 once it ended. */
  progress: number;
  /** Why it failed (failed only). */
  error: string | null;
  /** Null until completed. */
  engineVersion: string | null;
  createdBy: string | null;
  createdByName: string | null;
  createdAt: string;
  /** When it completed or failed. */
  completedAt: string | null;
  /** AUC difference (first − second) and its p-value, for lists; null until completed. */
  headline: { n: number; aucDifference: number; pValue: number } | null;
}

export interface ScoreComparisonDetail extends ScoreComparisonSummary {
  settings: ScoreComparisonSettings;
  /** Null until completed (and for a failed one). */
  results: ScoreComparisonResults | null;
  inputsSha256: string | null;
  resultsSha256: string | null;
}

/** A completed comparison: its results and hashes are there. */
export type CompletedScoreComparison = ScoreComparisonDetail & {
  status: 'completed';
  results: ScoreComparisonResults;
  engineVersion: string;
  inputsSha256: string;
  resultsSha256: string;
  headline: NonNullable<ScoreComparisonSummary['headline']>;
};
export const isCompletedComparison = (c: ScoreComparisonDetail): c is CompletedScoreComparison =>
  c.status === 'completed' && c.results !== null;

/** "Kestrel v2" — how a compared score version is named in sentences and tables. */
export const comparedName = (s: ComparedScoreVersion) => `${s.scoreName} v${s.version}`;
