import { z } from 'zod';

export const auditQuery = z.object({
  action: z.string().max(80).optional(),
  actor: z.string().max(254).optional(),
  targetType: z.string().max(60).optional(),
  from: z.string().datetime({ offset: true }).optional(),
  to: z.string().datetime({ offset: true }).optional(),
  limit: z.coerce.number().int().min(1).max(500).default(100),
  offset: z.coerce.number().int().min(0).default(0),
});
export type AuditQuery = z.infer<typeof auditQuery>;

export interface AuditRow {
  seq: string;
  at: string;
  actorEmail: string | null;
  action: string;
  targetType: string | null;
  targetId: string | null;
  sourceIp: string | null;
  details: Record<string, unknown>;
  hash: string;
  /** The actor's name and a name for the target, in words (server/src/domain/accounts/auditNames.ts). */
  actorName?: string | null;
  targetName?: string | null;
}

/** What the check of the audit hash chain found (GET /api/audit/verify). */
export interface ChainReport {
  ok: boolean;
  entries: number;
  firstBrokenSeq: string | null;
  reason: string | null;
  /** The newest entry when the chain is whole, so an operator can note it outside the database and compare later. */
  head: { seq: string; hash: string } | null;
}
