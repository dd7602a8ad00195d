import type { Request, Response } from 'express';
import type { AuditQuery } from '@shared/audit';
import { dataSource } from '../../platform/database/dataSource';
import { AuditEntry } from '../../platform/database/entities/AuditEntry';
import { verifyAuditChain } from '../../domain/accounts/audit';
import { withNames } from '../../domain/accounts/auditNames';
import { type CsvCell, sendCsv } from '../../domain/cohorts/csvExport';

function filtered(q: AuditQuery) {
  const qb = dataSource.getRepository(AuditEntry).createQueryBuilder('a').orderBy('a.seq', 'DESC');
  if (q.action) qb.andWhere('a.action LIKE :action', { action: `${q.action.replace(/[%_]/g, '\\$&')}%` });
  if (q.actor) qb.andWhere('a.actor_email ILIKE :actor', { actor: `%${q.actor.replace(/[%_]/g, '\\$&')}%` });
  if (q.targetType) qb.andWhere('a.target_type = :tt', { tt: q.targetType });
  if (q.from) qb.andWhere('a.at >= :from', { from: q.from });
  if (q.to) qb.andWhere('a.at <= :to', { to: q.to });
  return qb;
}

export async function list(req: Request, res: Response) {
  const q = req.query as unknown as AuditQuery;
  const [rows, total] = await filtered(q).skip(q.offset).take(q.limit).getManyAndCount();
  res.json({ total, entries: await withNames(rows) });
}

export async function verify(_req: Request, res: Response) {
  res.json(await verifyAuditChain());
}

// The export holds every entry that matches the filters (limit/offset are for paging the screen), up to a hard cap.
const CSV_MAX_ROWS = 200_000;

export async function csv(req: Request, res: Response) {
  const q = req.query as unknown as AuditQuery;
  const rows = await filtered(q).take(CSV_MAX_ROWS).getMany();
  const header = ['seq', 'at', 'actor_email', 'action', 'target_type', 'target_id', 'source_ip', 'details', 'prev_hash', 'hash'];
  const cells = rows.map((r): CsvCell[] => [r.seq, r.at, r.actorEmail, r.action, r.targetType, r.targetId, r.sourceIp, JSON.stringify(r.details ?? {}), r.prevHash, r.hash]);
  sendCsv(res, 'plumbline-audit.csv', header, cells);
}
