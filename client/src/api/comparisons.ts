// Score comparisons (two score versions on the same patients): queue, list, read (waiting for the end), reproduce.
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
/** With `waitSeconds`, a comparison still queued or computing is answered when it ends (or after that long). */
export const getComparison = async (id: string, signal?: AbortSignal, waitSeconds = 0) =>
  (
    await http.get<{ comparison: ScoreComparisonDetail }>(
      `/api/comparisons/${id}`,
      waitSeconds ? { waitSeconds } : undefined,
      signal,
    )
  ).comparison;
/** Answers at once with the queued comparison (202); its job computes it. */
export const createComparison = async (body: CreateScoreComparisonRequest) =>
  (await http.post<{ comparison: ScoreComparisonDetail }>('/api/comparisons', body)).comparison;
export const reproduceComparison = (id: string) => http.post<ReproduceReport>(`/api/comparisons/${id}/reproduce`);
