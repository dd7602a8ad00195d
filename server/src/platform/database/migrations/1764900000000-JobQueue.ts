import type { MigrationInterface, QueryRunner } from 'typeorm';
import PgBoss from 'pg-boss';

/** pg-boss's schema and Plumbline's queues, created here as the owner: the runtime role never creates a table. */
export const JOB_SCHEMA = 'pgboss';

/**
 * Queue settings (pg-boss 10 keeps them per queue, and creating a queue creates its partition table, so it is done
 * here). Runs and upload checks are retried once after a crash, then handed to their "-abandoned" queue, whose job
 * marks the run or upload failed. E-mails: 8 attempts in all with back-off from 5 s.
 */
export const QUEUE_SETTINGS: {
  name: string;
  retryLimit: number;
  retryDelay?: number;
  retryBackoff?: boolean;
  deadLetter?: string;
}[] = [
  { name: 'run-abandoned', retryLimit: 2, retryDelay: 10 },
  { name: 'upload-check-abandoned', retryLimit: 2, retryDelay: 10 },
  { name: 'run', retryLimit: 1, deadLetter: 'run-abandoned' },
  { name: 'upload-check', retryLimit: 1, deadLetter: 'upload-check-abandoned' },
  { name: 'mail', retryLimit: 7, retryDelay: 5, retryBackoff: true },
  { name: 'drift-rules', retryLimit: 2, retryDelay: 10 },
  { name: 'upload-sweep', retryLimit: 0 },
  // pg-boss's own queue for cron schedules (it would try to create it at start, which the runtime role may not).
  { name: '__pgboss__send-it', retryLimit: 2 },
];

export class JobQueue1764900000000 implements MigrationInterface {
  name = 'JobQueue1764900000000';

  async up(q: QueryRunner): Promise<void> {
    // pg-boss wraps its plan in its own BEGIN/COMMIT; TypeORM already runs this migration in a transaction.
    const plan = PgBoss.getConstructionPlans(JOB_SCHEMA).trim();
    if (!plan.startsWith('BEGIN;') || !plan.endsWith('COMMIT;'))
      throw new Error('unexpected pg-boss construction plan');
    await q.query(plan.slice('BEGIN;'.length, -'COMMIT;'.length));
    for (const s of QUEUE_SETTINGS) {
      await q.query(`SELECT ${JOB_SCHEMA}.create_queue($1, $2::json)`, [
        s.name,
        JSON.stringify({
          policy: 'standard',
          retryLimit: s.retryLimit,
          retryDelay: s.retryDelay ?? 0,
          retryBackoff: s.retryBackoff ?? false,
          deadLetter: s.deadLetter ?? null,
        }),
      ]);
    }
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`DROP SCHEMA ${JOB_SCHEMA} CASCADE`);
  }
}
