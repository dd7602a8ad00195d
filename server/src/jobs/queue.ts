// Background work as pg-boss jobs in PostgreSQL (DEVELOPERS.md, "Processes and jobs"). The schema and the queues are
// created by a migration as the owner (platform/database/migrations/1764900000000-JobQueue.ts); here pg-boss only reads and writes rows.
// A job is enqueued inside the transaction of the change that causes it (enqueue(manager, …)), so a change without
// its job, or a job without its change, cannot be committed. Only a process with jobs on starts pg-boss's workers.
import PgBoss from 'pg-boss';
import type { EntityManager, QueryRunner } from 'typeorm';
import { config } from '../platform/config';
import { dataSource } from '../platform/database/dataSource';
import { JOB_SCHEMA } from '../platform/database/migrations/1764900000000-JobQueue';
import { logger } from '../platform/observability/log';

export const JOB = {
  run: 'run',
  runAbandoned: 'run-abandoned',
  comparison: 'comparison',
  comparisonAbandoned: 'comparison-abandoned',
  uploadCheck: 'upload-check',
  uploadCheckAbandoned: 'upload-check-abandoned',
  mail: 'mail',
  driftRules: 'drift-rules',
  uploadSweep: 'upload-sweep',
} as const;
export type JobName = (typeof JOB)[keyof typeof JOB];
export type JobHandler<T = Record<string, unknown>> = (job: PgBoss.JobWithMetadata<T>) => Promise<void>;

/** Per-job options at send time; retry limits live with the queue (the migration). */
function sendOptions(name: JobName): PgBoss.SendOptions {
  if (name === JOB.run || name === JOB.uploadCheck || name === JOB.comparison)
    return { expireInSeconds: config.jobExpireSeconds };
  if (name === JOB.mail) return { expireInSeconds: 120 };
  return { expireInSeconds: 15 * 60 };
}

let boss: PgBoss | null = null;

/** The pg-boss object; constructing it opens nothing (sending goes through the caller's transaction). */
function theBoss(): PgBoss {
  if (!boss) {
    boss = new PgBoss({
      host: config.db.host,
      port: config.db.port,
      database: config.db.database,
      user: config.db.user,
      password: config.db.password,
      schema: JOB_SCHEMA,
      max: 4,
      application_name: 'plumbline-jobs',
      // The owner's migration creates and upgrades the schema; the runtime role cannot.
      migrate: false,
      // Expired claims (a crashed process) are found within a tenth of the expiry, at most a minute.
      maintenanceIntervalSeconds: Math.max(1, Math.min(60, Math.floor(config.jobExpireSeconds / 10))),
    });
    boss.on('error', (err) => logger.error({ err }, 'job queue error'));
  }
  return boss;
}

/** A transaction's connection as pg-boss's executor: the job row commits or rolls back with the change. */
function executor(qr: QueryRunner) {
  return {
    executeSql: async (text: string, values: unknown[] = []) => ({
      rows: (await qr.query(text, values, true)).records,
    }),
  };
}

/** Enqueues a job in the transaction `m` belongs to (a TypeORM transaction's manager; a query runner's `.manager`). */
export async function enqueue(
  m: EntityManager,
  name: JobName,
  data: Record<string, unknown>,
  options: PgBoss.SendOptions = {},
): Promise<string | null> {
  const qr = m.queryRunner;
  if (!qr || !qr.isTransactionActive)
    throw new Error(`a ${name} job is enqueued inside the transaction of the change that causes it`);
  return theBoss().send(name, data, { ...sendOptions(name), ...options, db: executor(qr) });
}

/** An executor on the runtime pool, one statement at a time, for claiming jobs outside a started pg-boss. */
const poolExecutor = {
  executeSql: async (text: string, values: unknown[] = []) => {
    const qr = dataSource.createQueryRunner();
    try {
      return { rows: (await qr.query(text, values, true)).records };
    } finally {
      await qr.release();
    }
  },
};

/**
 * Claims waiting jobs of one queue and runs them here, one by one (tests and the demo seed, which start no workers).
 * Returns how many ran. A handler that throws fails its job as a worker's would (pg-boss retries it).
 */
export async function drainJobs<T>(name: JobName, handler: JobHandler<T>, max = Infinity): Promise<number> {
  let done = 0;
  while (done < max) {
    const [job] = await theBoss().fetch<T>(name, { includeMetadata: true, db: poolExecutor });
    if (!job) break;
    try {
      await handler(job);
      await theBoss().complete(name, job.id, {}, { db: poolExecutor });
    } catch (err) {
      await theBoss().fail(name, job.id, { message: (err as Error).message }, { db: poolExecutor });
    }
    done++;
  }
  return done;
}

let working = false;
/** True in a process that started the job workers (PLUMBLINE_JOBS on, or `npm run worker`). */
export const jobWorkersRunning = () => working;

/** Starts pg-boss (maintenance, cron) and one worker per handler; returns the stop function. */
export async function startJobs(
  handlers: Partial<Record<JobName, { handler: JobHandler; concurrency?: number }>>,
  schedules: { name: JobName; cron: string }[] = [],
): Promise<(beforeStop?: () => Promise<void>) => Promise<void>> {
  const b = theBoss();
  await b.start();
  working = true;
  for (const [name, { handler, concurrency = 1 }] of Object.entries(handlers) as [
    JobName,
    { handler: JobHandler; concurrency?: number },
  ][]) {
    // batchSize 1: each job is claimed, run and completed on its own; several workers give concurrency.
    for (let i = 0; i < concurrency; i++)
      await b.work(name, { includeMetadata: true, batchSize: 1, pollingIntervalSeconds: 1 }, async ([job]) =>
        handler(job as PgBoss.JobWithMetadata<Record<string, unknown>>),
      );
  }
  for (const s of schedules) await b.schedule(s.name, s.cron, {}, { tz: 'UTC' });
  return async (beforeStop) => {
    working = false;
    await beforeStop?.();
    // graceful: waits for the handlers under way (the run queue ends its own first), then closes pg-boss's pool.
    await b.stop({ graceful: true, wait: true, timeout: 30_000 });
    boss = null;
  };
}

/** Jobs waiting (created or retry) and active per queue, read from pg-boss's table: the same in every process. */
export async function jobCounts(): Promise<{ name: string; waiting: number; active: number }[]> {
  const rows: { name: string; waiting: string; active: string }[] = await dataSource.query(
    `SELECT name, count(*) FILTER (WHERE state < 'active')::text AS waiting, count(*) FILTER (WHERE state = 'active')::text AS active
     FROM ${JOB_SCHEMA}.job WHERE state <= 'active' AND name NOT LIKE '\\_\\_pgboss%' GROUP BY name ORDER BY name`,
  );
  return rows.map((r) => ({ name: r.name, waiting: Number(r.waiting), active: Number(r.active) }));
}
