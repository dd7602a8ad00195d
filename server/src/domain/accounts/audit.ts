import type { ChainReport } from '@shared/audit';
import { createHash } from 'node:crypto';
import type { EntityManager } from 'typeorm';
import { dataSource } from '../../platform/database/dataSource';
import { AuditEntry } from '../../platform/database/entities/AuditEntry';

export interface AuditEvent {
  actorId?: string | null;
  actorEmail?: string | null;
  action: string;
  targetType?: string | null;
  targetId?: string | null;
  sourceIp?: string | null;
  details?: Record<string, unknown>;
}

const GENESIS = '0'.repeat(64);
const AUDIT_LOCK = 7_316_001; // advisory lock key: one writer extends the chain at a time

/** Canonical JSON (sorted keys) so the hash does not depend on key order in jsonb. */
export function canonical(value: unknown): string {
  if (value === null || typeof value !== 'object') return JSON.stringify(value ?? null);
  if (Array.isArray(value)) return `[${value.map(canonical).join(',')}]`;
  const obj = value as Record<string, unknown>;
  return `{${Object.keys(obj)
    .sort()
    .filter((k) => obj[k] !== undefined)
    .map((k) => `${JSON.stringify(k)}:${canonical(obj[k])}`)
    .join(',')}}`;
}

export function entryHash(prevHash: string, e: Omit<AuditEntry, 'seq' | 'hash' | 'prevHash'>): string {
  const body = canonical({
    at: e.at.toISOString(),
    actorId: e.actorId,
    actorEmail: e.actorEmail,
    action: e.action,
    targetType: e.targetType,
    targetId: e.targetId,
    sourceIp: e.sourceIp,
    details: e.details,
  });
  return createHash('sha256').update(prevHash).update('\n').update(body).digest('hex');
}

/** Appends one entry to the hash-chained trail, inside the caller's transaction when given one. */
export async function appendAudit(event: AuditEvent, manager?: EntityManager): Promise<void> {
  const write = async (m: EntityManager) => {
    await m.query('SELECT pg_advisory_xact_lock($1)', [AUDIT_LOCK]);
    const last: { hash: string }[] = await m.query('SELECT hash FROM audit_log ORDER BY seq DESC LIMIT 1');
    const prevHash = last[0]?.hash ?? GENESIS;
    // Millisecond precision so the stored timestamp hashes the same when read back.
    const entry = {
      at: new Date(Math.floor(Date.now())),
      actorId: event.actorId ?? null,
      actorEmail: event.actorEmail ?? null,
      action: event.action,
      targetType: event.targetType ?? null,
      targetId: event.targetId ?? null,
      sourceIp: event.sourceIp ?? null,
      details: event.details ?? {},
    };
    const hash = entryHash(prevHash, entry);
    const inserted = await m.insert(AuditEntry, { ...entry, prevHash, hash } as never);
    // The new head, where the runtime role can only add rows: a later deletion of this entry leaves it behind.
    await m.query('INSERT INTO audit_checkpoints (seq, hash) VALUES ($1, $2)', [inserted.identifiers[0].seq, hash]);
  };
  if (manager) await write(manager);
  else await dataSource.transaction(write);
}

export type { ChainReport };

/**
 * Re-computes every hash in order (an edited or removed entry breaks the chain after it), then compares the head
 * checkpoints (a removed tail leaves checkpoints whose entry is gone or different). What it cannot see: a tail removed
 * together with its checkpoints by someone with owner rights; compare `head` with a copy kept outside for that.
 */
export async function verifyAuditChain(manager: EntityManager = dataSource.manager): Promise<ChainReport> {
  const chain = await verifyLinks(manager);
  if (!chain.ok) return chain;
  const [lost]: { seq: string; present: boolean; newer: string }[] = await manager.query(
    `SELECT c.seq::text AS seq, (a.seq IS NOT NULL) AS present,
            (SELECT count(*)::text FROM audit_checkpoints n LEFT JOIN audit_log x ON x.seq = n.seq WHERE n.seq >= c.seq AND x.seq IS NULL) AS newer
     FROM audit_checkpoints c LEFT JOIN audit_log a ON a.seq = c.seq
     WHERE a.seq IS NULL OR a.hash <> c.hash
     ORDER BY c.seq LIMIT 1`,
  );
  if (lost) {
    const reason = lost.present
      ? `entry ${lost.seq} differs from the head recorded when it was written`
      : `entries are missing: ${lost.newer} recorded head${lost.newer === '1' ? '' : 's'} from entry ${lost.seq} on ${lost.newer === '1' ? 'has' : 'have'} no entry (the newest entries were deleted)`;
    return { ...chain, ok: false, firstBrokenSeq: lost.seq, reason };
  }
  return chain;
}

async function verifyLinks(manager: EntityManager): Promise<ChainReport> {
  let prev = GENESIS;
  let count = 0;
  let after = '0';
  for (;;) {
    const rows = await manager
      .getRepository(AuditEntry)
      .createQueryBuilder('a')
      .where('a.seq > :after', { after })
      .orderBy('a.seq', 'ASC')
      .limit(5000)
      .getMany();
    if (rows.length === 0) break;
    for (const r of rows) {
      count++;
      if (r.prevHash !== prev)
        return {
          ok: false,
          entries: count,
          firstBrokenSeq: r.seq,
          reason: 'link to previous entry broken',
          head: null,
        };
      if (entryHash(prev, r) !== r.hash)
        return {
          ok: false,
          entries: count,
          firstBrokenSeq: r.seq,
          reason: 'entry content does not match its hash',
          head: null,
        };
      prev = r.hash;
      after = r.seq;
    }
  }
  return {
    ok: true,
    entries: count,
    firstBrokenSeq: null,
    reason: null,
    head: count ? { seq: after, hash: prev } : null,
  };
}
