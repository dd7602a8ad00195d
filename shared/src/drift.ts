import { z } from 'zod';
import type { Estimate } from './validation';
import type { ScoreModel } from './model';
import type { PeriodKind } from './periods';

/** GET /api/sample-size: anticipated event rate and C, and at least one target 95% CI width; optionally the anticipated
 * O/E and calibration slope, the LP distribution (solved from C, normal, beta on the risk scale, or the predicted
 * risks a completed run stored for its cohort) and the net-benefit inputs (threshold, sensitivity, specificity). */
const open01 = z.coerce.number().gt(0).lt(1);
export const SAMPLE_SIZE_LP_KINDS = ['fromC', 'normal', 'beta', 'cohort'] as const;
export type SampleSizeLpKind = (typeof SAMPLE_SIZE_LP_KINDS)[number];
export const sampleSizeQuery = z
  .object({
    eventRate: open01,
    auc: z.coerce.number().gt(0.5).lt(1),
    ciWidthAuc: open01.optional(),
    ciWidthOE: z.coerce.number().gt(0).lt(10).optional(),
    ciWidthSlope: z.coerce.number().gt(0).lt(5).optional(),
    ciWidthNb: z.coerce.number().gt(0).lt(4).optional(),
    anticipatedOE: z.coerce.number().gt(0).lt(10).optional(),
    anticipatedSlope: z.coerce.number().gt(0).lt(5).optional(),
    lpDistribution: z.enum(SAMPLE_SIZE_LP_KINDS).optional(),
    lpMean: z.coerce.number().gt(-20).lt(20).optional(),
    lpSd: z.coerce.number().gt(0).lt(10).optional(),
    betaA: z.coerce.number().gt(0).lt(1000).optional(),
    betaB: z.coerce.number().gt(0).lt(1000).optional(),
    /** lpDistribution 'cohort': a completed run whose stored predicted risks give the LP distribution */
    runId: z.string().uuid().optional(),
    threshold: open01.optional(),
    sensitivity: open01.optional(),
    specificity: open01.optional(),
  })
  .refine(
    (q) =>
      q.ciWidthAuc !== undefined ||
      q.ciWidthOE !== undefined ||
      q.ciWidthSlope !== undefined ||
      q.ciWidthNb !== undefined,
    { message: 'give at least one of ciWidthAuc, ciWidthOE, ciWidthSlope, ciWidthNb' },
  )
  .refine((q) => q.lpDistribution !== 'normal' || (q.lpMean !== undefined && q.lpSd !== undefined), {
    message: 'a normal LP distribution needs lpMean and lpSd',
    path: ['lpSd'],
  })
  .refine((q) => q.lpDistribution !== 'beta' || (q.betaA !== undefined && q.betaB !== undefined), {
    message: 'a beta distribution needs betaA and betaB',
    path: ['betaA'],
  })
  .refine((q) => q.lpDistribution !== 'cohort' || q.runId !== undefined, {
    message: "the 'cohort' LP distribution needs runId (a completed run)",
    path: ['runId'],
  })
  .refine(
    (q) =>
      q.ciWidthNb === undefined ||
      (q.threshold !== undefined && q.sensitivity !== undefined && q.specificity !== undefined),
    { message: 'the net-benefit criterion needs threshold, sensitivity and specificity', path: ['ciWidthNb'] },
  );
export type SampleSizeQuery = z.infer<typeof sampleSizeQuery>;

// ---------- Drift timeline, alerts, alert rules and recalibration (see the drift API contract) ----------

export const ALERT_RULE_KINDS = ['citl-consecutive', 'cusum', 'oe-limit', 'auc-below'] as const;
export type AlertRuleKind = (typeof ALERT_RULE_KINDS)[number];
export const RECALIBRATION_METHODS = ['intercept', 'logistic', 'closed-test'] as const;
export type RecalibrationMethod = (typeof RECALIBRATION_METHODS)[number];

export interface DriftPoint {
  index: number;
  date: string | null;
  value: number;
}
export interface DriftSignal {
  index: number;
  date: string | null;
}

export interface DriftReference {
  runId: string;
  label: string;
  auc: Estimate | null;
  calibrationIntercept: Estimate | null;
  calibrationSlope: Estimate | null;
  oe: Estimate | null;
}

export interface FunnelPoint {
  oMinusE: number;
  lower95: number;
  upper95: number;
  lower998: number;
  upper998: number;
  status: 'inside' | 'warning' | 'outside';
}

export interface DriftPeriod {
  /** The run this point comes from: one per cohort version (chosen by the statistician, else the newest completed). */
  runId: string;
  /** 1 for the first run of the score version, in the order runs were started */
  runNumber: number;
  cohortVersionId: string;
  runChoice: 'chosen' | 'newest';
  /** other completed runs of the score version on the same cohort version, left off the timeline */
  otherRuns: number;
  /** every completed run of the score version on this cohort version, oldest first (the statistician may choose one) */
  runsOfCohortVersion: { runId: string; runNumber: number; finishedAt: string }[];
  label: string;
  /** what the cohort version's dates cover: one month, quarter, half-year or year, else the range; months when whole */
  period: { label: string; kind: PeriodKind | null; months: number | null };
  periodStart: string | null;
  periodEnd: string | null;
  n: number;
  events: number;
  /** observed events and expected events (Σp) in the period. */
  observed: number;
  expected: number;
  auc: Estimate | null;
  calibrationIntercept: Estimate | null;
  calibrationSlope: Estimate | null;
  oe: Estimate | null;
  funnel: FunnelPoint;
}

export const driftRunChoice = z.object({
  cohortVersionId: z.string().uuid(),
  /** null: back to the newest completed run */
  runId: z.string().uuid().nullable(),
});
export type DriftRunChoice = z.infer<typeof driftRunChoice>;

export interface DriftCusum {
  oddsRatio: number;
  h: number;
  points: DriftPoint[];
  signals: DriftSignal[];
  improvement: { oddsRatio: number; points: DriftPoint[]; signals: DriftSignal[] };
}

export interface AlertView {
  id: string;
  scoreId: string;
  scoreName: string;
  scoreVersionId: string;
  version: number;
  ruleKind: AlertRuleKind;
  period: string;
  message: string;
  detail: Record<string, unknown>;
  raisedAt: string;
  acknowledgedBy: string | null;
  acknowledgedAt: string | null;
  ackNote: string | null;
}

export interface DriftResponse {
  scoreId: string;
  scoreName: string;
  version: number;
  versionId: string;
  reference: DriftReference | null;
  periods: DriftPeriod[];
  cusum: DriftCusum;
  observedMinusExpected: { points: DriftPoint[] };
  alerts: AlertView[];
}

export interface AlertListResponse {
  alerts: AlertView[];
}
export interface AlertAckResponse {
  alert: AlertView;
}

export interface AlertRuleView {
  id: string;
  kind: AlertRuleKind;
  params: Record<string, unknown>;
  enabled: boolean;
}
export interface AlertRuleListResponse {
  rules: AlertRuleView[];
}
export interface AlertRuleCreateResponse {
  rule: AlertRuleView;
}

export const alertAckBody = z.object({ note: z.string().trim().min(1).max(2000) });
export type AlertAckBody = z.infer<typeof alertAckBody>;
/** Several open alerts acknowledged at once with one note (one audit entry each). */
export const alertBulkAckBody = z.object({
  ids: z.array(z.uuid()).min(1).max(500),
  note: z.string().trim().min(1).max(2000),
});
export type AlertBulkAckBody = z.infer<typeof alertBulkAckBody>;
export const alertListQuery = z.object({ score: z.uuid().optional() });

export const alertRuleBody = z.object({
  kind: z.enum(ALERT_RULE_KINDS),
  params: z.record(z.string(), z.unknown()).default({}),
  enabled: z.boolean().default(true),
});
export type AlertRuleBody = z.infer<typeof alertRuleBody>;

export const recalibrationBody = z.object({ method: z.enum(RECALIBRATION_METHODS) });
export type RecalibrationBody = z.infer<typeof recalibrationBody>;

export interface CalibrationPoint {
  meanPredicted: number;
  observed: number;
}
export interface CalibrationSummary {
  citl: Estimate | null;
  slope: Estimate | null;
  oe: Estimate | null;
}

export interface Derivation {
  method: RecalibrationMethod;
  chosen: 'original' | 'intercept' | 'logistic';
  intercept: Estimate;
  slope: Estimate | null;
  lrTests: { comparison: string; statistic: number; df: number; pValue: number }[];
  before: CalibrationSummary;
  after: CalibrationSummary;
  calibrationBefore: CalibrationPoint[];
  calibrationAfter: CalibrationPoint[];
}

export interface RecalibrationPreviewResponse {
  derivation: Derivation;
}

export interface RecalibratedVersion {
  id: string;
  scoreId: string;
  version: number;
  model: ScoreModel | null;
  derivedFromRunId: string | null;
  [key: string]: unknown;
}
export interface RecalibrateResponse {
  version: RecalibratedVersion;
  derivation: Derivation;
  banner: string;
}

export const RECALIBRATION_BANNER =
  'Draft: this recalibrated version must be validated on different data (a later period) and signed off before clinical use.';

/** The sample-size planner's answer (server/src/stats/sampleSize.ts; Riley et al. 2021, Stat Med 40:4230–4251). */
export interface SampleSizeCriterion {
  criterion: 'oe' | 'auc' | 'slope' | 'netBenefit';
  ciWidth: number;
  targetSe: number;
  n: number;
  events: number;
}

export interface SampleSizePlan {
  eventRate: number;
  auc: number;
  anticipatedOE: number;
  anticipatedSlope: number;
  criteria: SampleSizeCriterion[];
  largest: SampleSizeCriterion | null;
  /** the LP distribution the slope criterion integrated over, and the true-risk intercept and slope used */
  lpDistribution?: {
    kind: SampleSizeLpKind;
    mean?: number;
    sd?: number;
    a?: number;
    b?: number;
    patients?: number;
    intercept: number;
    slope: number;
  };
}
