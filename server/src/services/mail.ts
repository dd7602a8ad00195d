// E-mail notifications: persisted first (email_outbox), sent later by a retrying background sender,
// so an SMTP outage delays a message but never loses it nor the action that produced it.
import nodemailer from 'nodemailer';
import type { EntityManager } from 'typeorm';
import type { Role } from '@shared/roles';
import { config } from '../config';
import { dataSource } from '../db/dataSource';
import { EmailOutbox } from '../entities/EmailOutbox';
import { User } from '../entities/User';
import { logger } from '../observability/log';
import { timeJob } from '../observability/metrics';

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
 * Stores a message for the sender. Inside a caller's transaction (manager given) the message commits
 * with the action; without one, a database error is logged, never thrown, so the action stands.
 */
export async function queueEmail(msg: MailMessage, manager?: EntityManager): Promise<void> {
  const to = [...new Set(msg.to.filter((t) => t && t.includes('@')))];
  if (to.length === 0) return;
  const row = { to, subject: msg.subject.slice(0, 300), text: msg.text, kind: msg.kind, nextAttemptAt: new Date() };
  if (manager) {
    await manager.insert(EmailOutbox, row as never);
    return;
  }
  try {
    await dataSource.getRepository(EmailOutbox).insert(row as never);
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

/** Sends every message that is due, once; rows are locked so two senders never send one message twice. */
export async function sendPendingOnce(limit = 25): Promise<SendReport> {
  const report: SendReport = { sent: 0, retried: 0, failed: 0 };
  const transporter = transport();
  try {
    await dataSource.transaction(async (m) => {
      const due: EmailOutbox[] = await m
        .getRepository(EmailOutbox)
        .createQueryBuilder('o')
        .where(`o.status = 'pending' AND o.next_attempt_at <= now()`)
        .orderBy('o.created_at', 'ASC')
        .limit(limit)
        .setLock('pessimistic_write')
        .setOnLocked('skip_locked')
        .getMany();
      for (const row of due) {
        const attempts = row.attempts + 1;
        try {
          await transporter.sendMail({ from: config.smtp.from, to: row.to, subject: row.subject, text: row.text });
          await m.update(EmailOutbox, row.id, { status: 'sent', attempts, sentAt: new Date(), lastError: null });
          report.sent++;
        } catch (err) {
          const lastError = (err as Error).message?.slice(0, 2000) ?? String(err);
          const giveUp = attempts >= MAX_ATTEMPTS;
          await m.update(EmailOutbox, row.id, {
            attempts,
            lastError,
            status: giveUp ? 'failed' : 'pending',
            nextAttemptAt: new Date(Date.now() + backoffMs(attempts)),
          });
          if (giveUp) report.failed++;
          else report.retried++;
          logger[giveUp ? 'warn' : 'info']({ outboxId: row.id, kind: row.kind, attempts, maxAttempts: MAX_ATTEMPTS, lastError }, giveUp ? 'gave up sending an e-mail' : 'sending an e-mail failed; will retry');
        }
      }
    });
  } finally {
    transporter.close();
  }
  return report;
}

const SEND_INTERVAL_MS = config.mailIntervalMs;

/** The background sender: one pass every few seconds; a pass that fails is logged and the next one tries again. */
export function startMailSender(intervalMs = SEND_INTERVAL_MS): () => Promise<void> {
  let busy: Promise<unknown> | null = null;
  const timer = setInterval(() => {
    if (busy || !dataSource.isInitialized) return;
    busy = timeJob('mail_pass', () => sendPendingOnce())
      .catch((err) => logger.error({ err }, 'mail sender pass failed'))
      .finally(() => {
        busy = null;
      });
  }, intervalMs);
  timer.unref();
  return async () => {
    clearInterval(timer);
    if (busy) await busy;
  };
}


