import type { Request, Response } from 'express';
import type { AuditQuery } from '@shared/audit';
import { dataSource } from '../db/dataSource';
import { AuditEntry } from '../entities/AuditEntry';
import { verifyAuditChain } from '../services/audit';

export async function list(req: Request, res: Response) {
  const q = req.query as unknown as AuditQuery;
  const qb = dataSource.getRepository(AuditEntry).createQueryBuilder('a').orderBy('a.seq', 'DESC');
  if (q.action) qb.andWhere('a.action LIKE :action', { action: `${q.action.replace(/[%_]/g, '\\$&')}%` });
  if (q.actor) qb.andWhere('a.actor_email ILIKE :actor', { actor: `%${q.actor.replace(/[%_]/g, '\\$&')}%` });
  if (q.targetType) qb.andWhere('a.target_type = :tt', { tt: q.targetType });
  if (q.from) qb.andWhere('a.at >= :from', { from: q.from });
  if (q.to) qb.andWhere('a.at <= :to', { to: q.to });
  const [rows, total] = await qb.skip(q.offset).take(q.limit).getManyAndCount();
  res.json({ total, entries: rows });
}

export async function verify(_req: Request, res: Response) {
  res.json(await verifyAuditChain());
}
