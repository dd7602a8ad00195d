// Validation runs: the settings a run is started with, the results it stores, and the API shapes around them.
import { z } from 'zod';
import type { CalibrationBand, Estimate, ValidationResult } from './validation';
import type { SiteAnalysis, SubgroupAnalysis } from './subgroups';
import type { CohortAdequacy } from './adequacy';
import { missingDataSettingsSchema, type MissingDataResult } from './missingData';

export const RUN_STATUSES = ['queued', 'running', 'completed', 'failed'] as const;
export type RunStatus = (typeof RUN_STATUSES)[number];

export const TIME_GROUPINGS = ['none', 'month', 'quarter'] as const;
export type TimeGrouping = (typeof TIME_GROUPINGS)[number];

/** Net-benefit thresholds 0.01, 0.02, … 0.50 (rounded so the stored settings read cleanly). */
export const DEFAULT_NET_BENEFIT_THRESHOLDS: number[] = Array.from({ length: 50 }, (_, i) => (i + 1) / 100);

/** A subgroup is flagged as too small to judge below this many events or non-events (common practice, no source). */
export const MIN_SUBGROUP_EVENTS = 10;

const probability = z.number().finite().gt(0, 'a threshold must be above 0').lt(1, 'a threshold must be below 1');
const ascendingUnique = (xs: number[]) => xs.every((x, i) => i === 0 || x > xs[i - 1]);

export const runSettingsSchema = z
  .object({
    thresholds: z.array(probability).min(1).max(20).default([0.05, 0.1, 0.2, 0.3, 0.5]),
    netBenefitThresholds: z.array(probability).min(2).max(200).default(DEFAULT_NET_BENEFIT_THRESHOLDS),
    loessSpan: z.number().finite().gt(0.1, 'loessSpan must be above 0.1').max(1).default(0.75),
    hosmerLemeshowGroups: z.number().int().min(3).max(50).default(10),
    calibrationGroups: z.number().int().min(2).max(50).default(10),
    /** 0 turns the bootstrap off. */
    bootstrapReplicates: z.number().int().min(0).max(2000).default(0),
    bootstrapSeed: z
      .number()
      .int()
      .min(0)
      .max(2 ** 31 - 1)
      .default(20_260_101),
    subgroupColumns: z.array(z.string().trim().min(1).max(80)).max(20).default([]),
    /** A site (centre) column: per-site figures and a random-effects meta-analysis across sites. */
    siteColumn: z.string().trim().min(1).max(80).nullable().default(null),
    timeGrouping: z.enum(TIME_GROUPINGS).default('none'),
    /** Missing predictor values: complete cases when absent (shared/src/missingData.ts). */
    missingData: missingDataSettingsSchema.optional(),
  })
  .strict()
  .superRefine((s, ctx) => {
    if (!ascendingUnique(s.thresholds))
      ctx.addIssue({ code: 'custom', path: ['thresholds'], message: 'thresholds must ascend without repeats' });
    if (!ascendingUnique(s.netBenefitThresholds))
      ctx.addIssue({
        code: 'custom',
        path: ['netBenefitThresholds'],
        message: 'net-benefit thresholds must ascend without repeats',
      });
    if (new Set(s.subgroupColumns).size !== s.subgroupColumns.length)
      ctx.addIssue({ code: 'custom', path: ['subgroupColumns'], message: 'a subgroup column is listed twice' });
  });
export type RunSettings = z.infer<typeof runSettingsSchema>;
export type RunSettingsInput = z.input<typeof runSettingsSchema>;

/** The defaults, for forms. */
export const defaultRunSettings = (): RunSettings => runSettingsSchema.parse({});

export const createRunRequest = z
  .object({
    scoreVersionId: z.uuid(),
    cohortVersionId: z.uuid(),
    settings: runSettingsSchema.default(() => defaultRunSettings()),
  })
  .strict();
export type CreateRunRequest = z.input<typeof createRunRequest>;

/** Where a run stands in review and sign-off (the runs list filters by it). */
export const RUN_STAGES = ['not reviewed', 'awaiting sign-off', 'approved', 'returned', 'revoked'] as const;
export type RunStage = (typeof RUN_STAGES)[number];

export const runListQuery = z.object({
  score: z.uuid().optional(),
  scoreVersion: z.uuid().optional(),
  cohortVersion: z.uuid().optional(),
  status: z.enum(RUN_STATUSES).optional(),
  stage: z.enum(RUN_STAGES).optional(),
  search: z.string().trim().max(160).optional(),
  limit: z.coerce.number().int().min(1).max(200).default(50),
  offset: z.coerce.number().int().min(0).default(0),
});
export type RunListQuery = z.infer<typeof runListQuery>;

export const runCompareQuery = z.object({ a: z.uuid(), b: z.uuid() });

/** Headline figures of a subgroup (the full curve data is kept for the whole cohort only). */
export interface SubgroupMetrics {
  eventRate: number;
  auc: Estimate | null;
  calibrationIntercept: Estimate | null;
  calibrationSlope: Estimate | null;
  oe: Estimate | null;
  brier: number | null;
  ici: number | null;
  warnings: string[];
}

export interface SubgroupResult {
  column: string;
  level: string;
  n: number;
  events: number;
  /** events < MIN_SUBGROUP_EVENTS or non-events < MIN_SUBGROUP_EVENTS: figures are not computed. */
  tooSmall: boolean;
  result?: SubgroupMetrics;
}

/** One month or quarter of the cohort by event date; the drift view reads these. */
export interface PeriodResult {
  period: string; // '2024-03' or '2024-Q1'
  n: number;
  events: number;
  tooSmall: boolean;
  auc: Estimate | null;
  calibrationIntercept: Estimate | null;
  calibrationSlope: Estimate | null;
  oe: Estimate | null;
  /** observed events / n and mean predicted risk. */
  observed: number;
  expected: number;
  warnings: string[];
}

export interface RunResults {
  overall: ValidationResult;
  subgroups: SubgroupResult[];
  periods: PeriodResult[];
  /** rows without an event date when periods were asked for. */
  undatedRows?: number;
  minSubgroupEvents: number;
  /**
   * Per subgroup column (fairness): every level's AUC, calibration intercept and slope, O/E and ICI with 95% CIs (ICI's
   * by the run's bootstrap when it has replicates), levels below the published minimum flagged, and Cochran's Q across
   * levels for calibration-in-the-large and log O/E. Runs by engine 1.1.0 on.
   */
  subgroupAnalyses?: ({ column: string } & SubgroupAnalysis)[];
  /** With a site column: per-site figures and the REML random-effects pooling of each metric. */
  sites?: { column: string } & SiteAnalysis;
  /** With bootstrap replicates: the pointwise 95% band of the whole cohort's calibration curve. */
  calibrationBand?: CalibrationBand;
  /**
   * On a cohort with gaps in the score's predictors (or when multiple imputation was asked for): the complete-case
   * analysis (every figure above is on complete cases) beside the pooled multiple imputation. Runs by engine 1.2.0 on.
   */
  missingData?: MissingDataResult;
}

export interface RunSummary {
  id: string;
  scoreId: string;
  scoreName: string;
  scoreVersionId: string;
  scoreVersion: number;
  cohortId: string;
  cohortName: string;
  cohortVersionId: string;
  cohortVersion: number;
  cohortLabel: string;
  status: RunStatus;
  progress: number;
  progressMessage: string | null;
  error: string | null;
  engineVersion: string | null;
  createdBy: string | null;
  createdByName: string | null;
  createdAt: string;
  startedAt: string | null;
  finishedAt: string | null;
  attempt: number;
  /** headline numbers for lists, when completed. */
  headline: { n: number; events: number; auc: number; oe: number } | null;
  /** The current review's verdict, if any. */
  review?: { verdict: string; reviewedAt: string } | null;
  /** The run's latest signature (approve, return or revoke), if any. */
  signoff?: { meaning: string; signedAt: string; signedBy: string } | null;
}

export interface RunDetail extends RunSummary {
  settings: RunSettings;
  results: RunResults | null;
  inputsSha256: string | null;
  resultsSha256: string | null;
  /** Completed runs: events and non-events against the usual minimums, and the precision they give (shared/src/adequacy.ts). */
  adequacy?: CohortAdequacy | null;
}

export interface ReproduceReport {
  match: boolean;
  storedSha256: string;
  recomputedSha256: string;
  engineVersionStored: string;
  engineVersionNow: string;
  differences?: { path: string; stored: unknown; recomputed: unknown }[];
}

export interface CompareMetric {
  key: string;
  label: string;
  a: number | null;
  b: number | null;
  /** b − a */
  delta: number | null;
  aLower?: number | null;
  aUpper?: number | null;
  bLower?: number | null;
  bUpper?: number | null;
}

export interface RunComparison {
  a: RunSummary;
  b: RunSummary;
  sameScore: boolean;
  settingsDiffer: string[];
  metrics: CompareMetric[];
}

/** What the start form offers: score versions and cohort versions with the columns a run can group by. */
export interface RunOptions {
  scoreVersions: {
    id: string;
    scoreId: string;
    scoreName: string;
    version: number;
    mode: 'formula' | 'supplied';
    clinicalStatus: string;
    columns: string[];
  }[];
  cohortVersions: {
    id: string;
    cohortId: string;
    cohortName: string;
    version: number;
    label: string;
    rowCount: number;
    events: number;
    groupColumns: string[];
    hasDates: boolean;
    /** predictors the upload's mapping allows gaps in (multiple imputation is offered when there are any) */
    predictorsWithGaps: string[];
    periods: 'month' | 'quarter' | null;
    createdAt: string;
  }[];
}
