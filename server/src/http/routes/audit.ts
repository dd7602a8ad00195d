import type { Request, Response } from 'express';
import type { AuditQuery } from '@shared/audit';
import { verifyAuditChain } from '../../domain/accounts/audit';
import { auditEntriesForExport, listAuditEntries } from '../../domain/accounts/auditTrail';
import { type CsvCell, sendCsv } from '../../domain/cohorts/csvExport';

export async function list(req: Request, res: Response) {
  res.json(await listAuditEntries(req.query as unknown as AuditQuery));
}

export async function verify(_req: Request, res: Response) {
  res.json(await verifyAuditChain());
}

export async function csv(req: Request, res: Response) {
  const rows = await auditEntriesForExport(req.query as unknown as AuditQuery);
  const header = [
    'seq',
    'at',
    'actor_email',
    'action',
    'target_type',
    'target_id',
    'source_ip',
    'details',
    'prev_hash',
    'hash',
  ];
  const cells = rows.map((r): CsvCell[] => [
    r.seq,
    r.at,
    r.actorEmail,
    r.action,
    r.targetType,
    r.targetId,
    r.sourceIp,
    JSON.stringify(r.details ?? {}),
    r.prevHash,
    r.hash,
  ]);
  sendCsv(res, 'plumbline-audit.csv', header, cells);
}
