// Drift over time: the per-version timeline, alerts and their acknowledgement, alert rules, recalibration, sample size.
import type {
  AlertAckResponse,
  AlertListResponse,
  AlertRuleBody,
  AlertRuleCreateResponse,
  AlertRuleListResponse,
  DriftResponse,
  DriftRunChoice,
  RecalibrateResponse,
  RecalibrationMethod,
  RecalibrationPreviewResponse,
  SampleSizeQuery,
} from '@shared/drift';
import { http } from './http';

export type {
  AlertRuleView,
  AlertView,
  CalibrationSummary,
  Derivation,
  DriftCusum,
  DriftPeriod,
  DriftPoint,
  DriftResponse,
  RecalibratedVersion,
  RecalibrationMethod,
} from '@shared/drift';
export type { Estimate } from '@shared/validation';

import type { AlertView as AlertRecord, SampleSizePlan } from '@shared/drift';
export type { SampleSizeCriterion, SampleSizePlan } from '@shared/drift';

const version = (scoreId: string, v: number | string) =>
  `/api/scores/${encodeURIComponent(scoreId)}/versions/${encodeURIComponent(String(v))}`;

export const getDrift = (scoreId: string, v: number | string, signal?: AbortSignal) =>
  http.get<DriftResponse>(`${version(scoreId, v)}/drift`, undefined, signal);
export const chooseDriftRun = (scoreId: string, v: number | string, choice: DriftRunChoice) =>
  http.put<{ choice: DriftRunChoice }>(`${version(scoreId, v)}/drift/runs`, choice);
export const listAlerts = async (signal?: AbortSignal, score?: string) =>
  (await http.get<AlertListResponse>('/api/alerts', { score }, signal)).alerts;
/** Several open alerts acknowledged with one note (all or none). */
export const acknowledgeAlerts = async (ids: string[], note: string) =>
  (await http.post<{ alerts: AlertRecord[] }>('/api/alerts/acknowledge', { ids, note })).alerts;
export const acknowledgeAlert = async (id: string, note: string) =>
  (await http.post<AlertAckResponse>(`/api/alerts/${id}/acknowledge`, { note })).alert;
export const listAlertRules = async (scoreId: string) =>
  (await http.get<AlertRuleListResponse>(`/api/scores/${encodeURIComponent(scoreId)}/alert-rules`)).rules;
export const createAlertRule = async (scoreId: string, rule: AlertRuleBody) =>
  (await http.post<AlertRuleCreateResponse>(`/api/scores/${encodeURIComponent(scoreId)}/alert-rules`, rule)).rule;
export const previewRecalibration = async (runId: string, method: RecalibrationMethod) =>
  (await http.post<RecalibrationPreviewResponse>(`/api/runs/${runId}/recalibration-preview`, { method })).derivation;
export const recalibrate = (runId: string, method: RecalibrationMethod) =>
  http.post<RecalibrateResponse>(`/api/runs/${runId}/recalibrate`, { method });
export const planSampleSize = (input: SampleSizeQuery) => http.get<SampleSizePlan>('/api/sample-size', { ...input });
