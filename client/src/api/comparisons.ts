// Score comparisons (two score versions on the same patients): start, list, read.
import type {
  CreateScoreComparisonRequest,
  ScoreComparisonDetail,
  ScoreComparisonSummary,
} from '@shared/scoreComparison';
import type { ReproduceReport } from '@shared/runs';
import { http } from './http';

export interface ComparisonFilter {
  scoreVersion?: string;
  cohortVersion?: string;
  limit?: number;
  offset?: number;
}

export const listComparisons = (filter: ComparisonFilter = {}, signal?: AbortSignal) =>
  http.get<{ total: number; comparisons: ScoreComparisonSummary[] }>('/api/comparisons', { ...filter }, signal);
export const getComparison = async (id: string, signal?: AbortSignal) =>
  (await http.get<{ comparison: ScoreComparisonDetail }>(`/api/comparisons/${id}`, undefined, signal)).comparison;
export const createComparison = async (body: CreateScoreComparisonRequest) =>
  (await http.post<{ comparison: ScoreComparisonDetail }>('/api/comparisons', body)).comparison;
export const reproduceComparison = (id: string) => http.post<ReproduceReport>(`/api/comparisons/${id}/reproduce`);
