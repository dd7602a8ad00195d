import type { AuditRow, ChainReport } from '@shared/audit';
import { downloadFile, http } from './http';

export interface AuditFilter {
  action?: string;
  actor?: string;
  targetType?: string;
  from?: string;
  to?: string;
  limit?: number;
  offset?: number;
}

export interface AuditPage {
  total: number;
  entries: AuditRow[];
}

export type { ChainReport };

export const listAudit = (filter: AuditFilter, signal?: AbortSignal) =>
  http.get<AuditPage>('/api/audit', { ...filter }, signal);

export const verifyAuditChain = () => http.get<ChainReport>('/api/audit/verify');

/** The filtered trail as CSV (the whole match, not only the page shown). */
export const downloadAuditCsv = (filter: AuditFilter) =>
  downloadFile('/api/audit.csv', 'plumbline-audit.csv', { ...filter, limit: undefined, offset: undefined });
