// Stored cohorts and their versions (read side).
import type { ColumnMappingSpec, ColumnSummary } from '@shared/cohorts';
import type { MissingnessSummary } from '@shared/missingness';
import { http } from './http';

export interface CohortListItem {
  id: string;
  name: string;
  description: string;
  createdAt: string;
  versions: number;
  latestVersion: number | null;
  latestLabel: string | null;
  latestRows: number | null;
  latestEvents: number | null;
  latestAt: string | null;
}

export interface CohortVersionInfo {
  id: string;
  cohortId: string;
  version: number;
  label: string;
  periodStart: string | null;
  periodEnd: string | null;
  sourceFilename: string;
  sourceSha256: string;
  sourceBytes: number;
  rowCount: number;
  events: number;
  excludedCount: number;
  exclusions: { reason: string; count: number }[];
  mapping: ColumnMappingSpec & { scoreVersionId: string };
  uploadedByName: string | null;
  createdAt: string;
  columnSummary?: Record<string, ColumnSummary>;
  /** One version's detail: missing values per column, subgroup, period and combination (null: stored before they were kept). */
  missingness?: MissingnessSummary | null;
}

export interface CohortRow {
  lineNo: number;
  outcome: number;
  eventDate: string | null;
  /** the period as uploaded (2026-Q2), or its first day when the version's periods were of mixed kinds */
  period: string | null;
  /** null: a gap (the predictor was allowed to have gaps). */
  predictors: Record<string, number | string | null>;
  subgroups: Record<string, string>;
}

export interface Paging {
  page: number;
  pageSize: number;
  search?: string;
  sortBy?: string;
  sortDir?: 'asc' | 'desc';
}

export const listCohorts = (q: Paging) =>
  http.get<{ cohorts: CohortListItem[]; total: number }>('/api/cohorts', { ...q });

export const getCohort = (id: string) =>
  http.get<{
    cohort: { id: string; name: string; description: string; createdAt: string };
    versions: CohortVersionInfo[];
  }>(`/api/cohorts/${encodeURIComponent(id)}`);

export const getCohortVersion = async (id: string, version: number) =>
  (await http.get<{ version: CohortVersionInfo }>(`/api/cohorts/${encodeURIComponent(id)}/versions/${version}`))
    .version;

export const listCohortRows = (id: string, version: number, q: Paging) =>
  http.get<{ rows: CohortRow[]; total: number; predictorKeys: string[]; subgroupKeys: string[] }>(
    `/api/cohorts/${encodeURIComponent(id)}/versions/${version}/rows`,
    { ...q },
  );
