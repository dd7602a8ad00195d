// Drift over time: the per-version timeline, alerts and their acknowledgement, alert rules, recalibration, sample size.
import { http } from './http';

// Local copies of the drift contract until shared/src/drift.ts carries the response types.
export interface Estimate {
  estimate: number;
  lower: number;
  upper: number;
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
  runId: string;
  label: string;
  periodStart: string | null;
  periodEnd: string | null;
  n: number;
  events: number;
  observed: number;
  expected: number;
  auc: Estimate | null;
  calibrationIntercept: Estimate | null;
  calibrationSlope: Estimate | null;
  oe: Estimate | null;
  funnel: FunnelPoint;
}
export interface SeriesPoint {
  index: number;
  date: string | null;
  value: number;
}
export interface CusumSignal {
  index: number;
  date: string | null;
}
export interface CusumSeries {
  oddsRatio: number;
  points: SeriesPoint[];
  signals: CusumSignal[];
}
export interface AlertView {
  id: string;
  scoreId: string;
  scoreName: string;
  scoreVersionId: string;
  version: number;
  ruleKind: string;
  period: string | null;
  message: string;
  detail: unknown;
  raisedAt: string;
  acknowledgedBy: string | null;
  acknowledgedAt: string | null;
  ackNote: string | null;
}
export interface DriftReference {
  runId: string;
  label: string;
  auc: Estimate | null;
  calibrationIntercept: Estimate | null;
  calibrationSlope: Estimate | null;
  oe: Estimate | null;
}
export interface DriftTimeline {
  scoreId: string;
  scoreName: string;
  version: number;
  versionId: string;
  reference: DriftReference | null;
  periods: DriftPeriod[];
  cusum: CusumSeries & { h: number; improvement: CusumSeries };
  observedMinusExpected: { points: SeriesPoint[] };
  alerts: AlertView[];
}
export type AlertRuleKind = 'citl-consecutive' | 'cusum' | 'oe-limit' | 'auc-below';
export interface AlertRule {
  id: string;
  kind: AlertRuleKind;
  params: Record<string, unknown>;
  enabled: boolean;
}
export type RecalibrationMethod = 'intercept' | 'logistic' | 'closed-test';
export interface CalibrationSnapshot {
  citl: number | null;
  slope: number | null;
  oe: number | null;
}
export interface RecalibrationDerivation {
  method: RecalibrationMethod;
  chosen: 'original' | 'intercept' | 'logistic';
  intercept: Estimate;
  slope: Estimate | null;
  lrTests: { comparison: string; statistic: number; df: number; pValue: number }[];
  before: CalibrationSnapshot;
  after: CalibrationSnapshot;
  calibrationBefore: { meanPredicted: number; observed: number }[];
  calibrationAfter: { meanPredicted: number; observed: number }[];
}
export interface RecalibratedVersion {
  id: string;
  scoreId: string;
  version: number;
  derivedFromRunId: string | null;
  [key: string]: unknown;
}
export interface SampleSizeCriterion {
  criterion: 'oe' | 'auc' | 'slope';
  ciWidth: number;
  targetSe: number;
  n: number;
  events: number;
}
export interface SampleSizePlan {
  eventRate: number;
  auc: number;
  criteria: SampleSizeCriterion[];
  largest: SampleSizeCriterion | null;
  lpDistribution?: { mean: number; sd: number };
}
export interface SampleSizeInput {
  eventRate: number;
  auc: number;
  ciWidthAuc?: number;
  ciWidthOE?: number;
  ciWidthSlope?: number;
}

export const getDrift = (scoreId: string, version: number | string, signal?: AbortSignal) =>
  http.get<DriftTimeline>(`/api/scores/${scoreId}/versions/${version}/drift`, undefined, signal);
export const listAlerts = async (signal?: AbortSignal) => (await http.get<{ alerts: AlertView[] }>('/api/alerts', undefined, signal)).alerts;
export const acknowledgeAlert = async (id: string, note: string) => (await http.post<{ alert: AlertView }>(`/api/alerts/${id}/acknowledge`, { note })).alert;
export const listAlertRules = async (scoreId: string) => (await http.get<{ rules: AlertRule[] }>(`/api/scores/${scoreId}/alert-rules`)).rules;
export const createAlertRule = async (scoreId: string, rule: Omit<AlertRule, 'id'>) => (await http.post<{ rule: AlertRule }>(`/api/scores/${scoreId}/alert-rules`, rule)).rule;
export const previewRecalibration = async (runId: string, method: RecalibrationMethod) =>
  (await http.post<{ derivation: RecalibrationDerivation }>(`/api/runs/${runId}/recalibration-preview`, { method })).derivation;
export const recalibrate = (runId: string, method: RecalibrationMethod) =>
  http.post<{ version: RecalibratedVersion; derivation: RecalibrationDerivation; banner: string }>(`/api/runs/${runId}/recalibrate`, { method });
export const planSampleSize = (input: SampleSizeInput) => http.get<SampleSizePlan>('/api/sample-size', { ...input });
