// E-mail notifications: persisted first (email_outbox) with a 'mail' job in the same transaction, sent later by that
// job (pg-boss retries it with back-off), so an SMTP outage delays a message but never loses it nor the action that
// produced it. No database transaction is held while an SMTP server is talked to: a message is claimed, sent, then marked.
import nodemailer from 'nodemailer';
import type { EntityManager } from 'typeorm';
import type { Role } from '@shared/roles';
import { config } from '../../platform/config';
import { dataSource } from '../../platform/database/dataSource';
import { EmailOutbox } from '../../platform/database/entities/EmailOutbox';
import { User } from '../../platform/database/entities/User';
import { logger } from '../../platform/observability/log';
import { timeJob } from '../../platform/observability/metrics';
import { enqueue, JOB, type JobHandler } from '../../jobs/queue';

export interface MailMessage {
  to: string[];
  subject: string;
  text: string;
  kind: string;
}

/** After this many failed attempts a message is marked failed (and stays visible on the outbox page). */
export const MAX_ATTEMPTS = 8;
/** Exponential backoff: 5 s, 10 s, 20 s … capped at 10 minutes. */
export const backoffMs = (attempts: number) => Math.min(5_000 * 2 ** Math.max(0, attempts - 1), 10 * 60_000);

/**
 * Stores a message and its 'mail' job. Inside a caller's transaction (manager given) both commit with the action;
 * without one, a database error is logged, never thrown, so the action stands.
 */
export async function queueEmail(msg: MailMessage, manager?: EntityManager): Promise<void> {
  const to = [...new Set(msg.to.filter((t) => t && t.includes('@')))];
  if (to.length === 0) return;
  const store = async (m: EntityManager) => {
    const inserted = await m.getRepository(EmailOutbox).insert({
      to,
      subject: msg.subject.slice(0, 300),
      text: msg.text,
      kind: msg.kind,
      nextAttemptAt: () => 'now()',
    });
    await enqueue(m, JOB.mail, { outboxId: inserted.identifiers[0].id as string });
  };
  if (manager) {
    await store(manager);
    return;
  }
  try {
    await dataSource.transaction(store);
  } catch (err) {
    logger.error({ err, subject: msg.subject, kind: msg.kind }, 'could not queue an e-mail');
  }
}

/** E-mail addresses of the active accounts with this role. */
export async function recipientsForRole(role: Role, manager: EntityManager = dataSource.manager): Promise<string[]> {
  const users = await manager.getRepository(User).find({ where: { role, active: true }, order: { email: 'ASC' } });
  return users.map((u) => u.email);
}

function transport() {
  const { host, port, secure, user, password } = config.smtp;
  return nodemailer.createTransport({
    host,
    port,
    secure,
    auth: user ? { user, pass: password } : undefined,
    connectionTimeout: 10_000,
    greetingTimeout: 10_000,
    socketTimeout: 20_000,
  });
}

export interface SendReport {
  sent: number;
  retried: number;
  failed: number;
}

interface OutboxRow {
  id: string;
  to: string[];
  subject: string;
  text: string;
  kind: string;
  attempts: number;
}
type Outcome = 'sent' | 'retried' | 'failed';

/**
 * Claims the messages `where` picks in one guarded UPDATE … RETURNING: a claimed message is not claimed again for
 * five minutes (the lease of one SMTP conversation).
 */
async function claim(where: string, params: Record<string, unknown>): Promise<OutboxRow[]> {
  const { raw }: { raw: OutboxRow[] } = await dataSource
    .createQueryBuilder()
    .update(EmailOutbox)
    .set({ nextAttemptAt: () => `now() + interval '5 minutes'` })
    .where(where, params)
    .returning('id, recipients AS "to", subject, text, kind, attempts')
    .execute();
  return raw;
}

/** Sends one claimed message and records the outcome; `lastTry` marks it failed instead of waiting for a retry. */
async function sendClaimed(
  row: OutboxRow,
  transporter: ReturnType<typeof transport>,
  lastTry: boolean,
): Promise<Outcome> {
  const attempts = row.attempts + 1;
  try {
    await transporter.sendMail({ from: config.smtp.from, to: row.to, subject: row.subject, text: row.text });
  } catch (err) {
    const lastError = (err as Error).message?.slice(0, 2000) ?? String(err);
    const giveUp = lastTry || attempts >= MAX_ATTEMPTS;
    await dataSource.getRepository(EmailOutbox).update(row.id, {
      attempts,
      lastError,
      status: giveUp ? 'failed' : 'pending',
      nextAttemptAt: new Date(Date.now() + backoffMs(attempts)),
    });
    logger[giveUp ? 'warn' : 'info'](
      { outboxId: row.id, kind: row.kind, attempts, maxAttempts: MAX_ATTEMPTS, lastError },
      giveUp ? 'gave up sending an e-mail' : 'sending an e-mail failed; will retry',
    );
    return giveUp ? 'failed' : 'retried';
  }
  await dataSource
    .getRepository(EmailOutbox)
    .update(row.id, { status: 'sent', attempts, sentAt: new Date(), lastError: null });
  return 'sent';
}

/** The 'mail' job: sends its message unless it was sent meanwhile; a failure is thrown so pg-boss tries again later. */
export const mailJob: JobHandler<{ outboxId: string }> = async (job) => {
  const [row] = await claim(`id = :id AND status = 'pending'`, { id: job.data.outboxId });
  if (!row) return;
  const transporter = transport();
  try {
    const outcome = await timeJob('mail', () => sendClaimed(row, transporter, job.retryCount >= job.retryLimit));
    if (outcome === 'retried') throw new Error(`sending e-mail ${row.id} failed; pg-boss tries again`);
  } finally {
    transporter.close();
  }
};

/**
 * Sends every message that is due, once (tests, and an operator emptying the outbox by hand). Each message is claimed
 * in a statement of its own (SKIP LOCKED, and a lease on next_attempt_at), so no transaction waits on SMTP and two
 * senders never send one message at once.
 */
export async function sendPendingOnce(limit = 25): Promise<SendReport> {
  const report: SendReport = { sent: 0, retried: 0, failed: 0 };
  const transporter = transport();
  const seen: string[] = [];
  try {
    while (seen.length < limit) {
      const [row] = await claim(
        `id = (SELECT id FROM email_outbox WHERE status = 'pending' AND next_attempt_at <= now() AND NOT (id = ANY(:seen::uuid[]))
           ORDER BY created_at LIMIT 1 FOR UPDATE SKIP LOCKED)`,
        { seen },
      );
      if (!row) break;
      seen.push(row.id);
      report[await sendClaimed(row, transporter, false)]++;
    }
  } finally {
    transporter.close();
  }
  return report;
}

/** The newest outbox rows (at most 200), for the development outbox page. */
export async function recentOutbox() {
  const rows = await dataSource.getRepository(EmailOutbox).find({ order: { createdAt: 'DESC' }, take: 200 });
  return rows.map((r) => ({
    id: r.id,
    to: r.to,
    subject: r.subject,
    kind: r.kind,
    status: r.status,
    attempts: r.attempts,
    lastError: r.lastError,
    createdAt: r.createdAt.toISOString(),
    sentAt: r.sentAt ? r.sentAt.toISOString() : null,
  }));
}
