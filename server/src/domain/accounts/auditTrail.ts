// Reading the audit trail: the page's filtered list (newest first) and the CSV export of every matching entry.
import type { AuditQuery } from '@shared/audit';
import { dataSource } from '../../platform/database/dataSource';
import { AuditEntry } from '../../platform/database/entities/AuditEntry';
import { withNames } from './auditNames';

function filtered(q: AuditQuery) {
  const qb = dataSource.getRepository(AuditEntry).createQueryBuilder('a').orderBy('a.seq', 'DESC');
  if (q.action) qb.andWhere('a.action LIKE :action', { action: `${q.action.replace(/[%_]/g, '\\$&')}%` });
  if (q.actor) qb.andWhere('a.actor_email ILIKE :actor', { actor: `%${q.actor.replace(/[%_]/g, '\\$&')}%` });
  if (q.targetType) qb.andWhere('a.target_type = :tt', { tt: q.targetType });
  if (q.from) qb.andWhere('a.at >= :from', { from: q.from });
  if (q.to) qb.andWhere('a.at <= :to', { to: q.to });
  return qb;
}

/** One page of matching entries with the names of their actors and targets, and how many match in all. */
export async function listAuditEntries(q: AuditQuery) {
  const [rows, total] = await filtered(q).skip(q.offset).take(q.limit).getManyAndCount();
  return { total, entries: await withNames(rows) };
}

// The export holds every entry that matches the filters (limit/offset are for paging the screen), up to a hard cap.
const CSV_MAX_ROWS = 200_000;

/** Every matching entry (up to CSV_MAX_ROWS) for the CSV export. */
export function auditEntriesForExport(q: AuditQuery): Promise<AuditEntry[]> {
  return filtered(q).take(CSV_MAX_ROWS).getMany();
}
