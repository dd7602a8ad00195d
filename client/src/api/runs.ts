// Validation runs: start, list, read, reproduce, compare.
import type {
  CreateRunRequest,
  ReproduceReport,
  RunComparison,
  RunDetail,
  RunOptions,
  RunStage,
  RunStatus,
  RunSummary,
} from '@shared/runs';
import { http } from './http';

export interface RunFilter {
  score?: string;
  status?: RunStatus;
  stage?: RunStage;
  search?: string;
  limit?: number;
  offset?: number;
}

export const listRuns = (filter: RunFilter = {}, signal?: AbortSignal) =>
  http.get<{ total: number; runs: RunSummary[] }>('/api/runs', { ...filter }, signal);
export const getRun = async (id: string, signal?: AbortSignal) =>
  (await http.get<{ run: RunDetail }>(`/api/runs/${id}`, undefined, signal)).run;
export const createRun = async (body: CreateRunRequest) => (await http.post<{ run: RunDetail }>('/api/runs', body)).run;
export const runOptions = () => http.get<RunOptions>('/api/runs/options');
export const reproduceRun = (id: string) => http.post<ReproduceReport>(`/api/runs/${id}/reproduce`);
export const compareRuns = (a: string, b: string) => http.get<RunComparison>('/api/runs/compare', { a, b });
