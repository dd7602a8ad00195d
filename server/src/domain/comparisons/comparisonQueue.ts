// Computing score comparisons off the request path, as runs are (runs/runQueue.ts): the 'comparison' job computes one
// in a worker thread under a lease and stores it completed or failed; its dead-letter job marks failed one whose
// process stopped on every attempt. Any process with job workers may take it from the one pg-boss queue.
import type { ScoreComparisonSettings } from '@shared/scoreComparison';
import { dataSource } from '../../platform/database/dataSource';
import { ScoreComparison } from '../../platform/database/entities/ScoreComparison';
import { drainJobs, JOB, type JobHandler } from '../../jobs/queue';
import { compareInThread } from '../../jobs/threads/pool';
import type { ComparisonAnswer } from '../../jobs/threads/comparisonWorker';
import { logger } from '../../platform/observability/log';
import { jobDuration } from '../../platform/observability/metrics';
import { appendAudit } from '../accounts/audit';
import { comparisonResultsSha256 } from './comparisonCompute';

/** A comparison whose process died is tried once more (pg-boss retryLimit 1 on the 'comparison' queue). */
export const MAX_ATTEMPTS = 2;
const PROGRESS_WRITE_MS = 250;

/** The advisory-lock key of a comparison's lease (also written inline in comparisonAbandonedJob's guard). */
const LEASE_KEY_SQL = `hashtextextended('plumbline comparison ' || $1::text, 0)`;

export type ComputeComparison = (
  input: {
    firstScoreVersionId: string;
    secondScoreVersionId: string;
    cohortVersionId: string;
    settings: ScoreComparisonSettings;
  },
  onProgress: (fraction: number) => void,
) => Promise<ComparisonAnswer>;

type ComparisonJobData = { comparisonId: string };

const repo = () => dataSource.getRepository(ScoreComparison);

/**
 * The 'comparison' job, computing with `compute` (a worker thread; the demo seed computes in its own thread). The
 * lease (a session-level advisory lock on a connection of its own, dropped by PostgreSQL when the process dies) makes
 * a retry wait while a live process still computes it; a retry that finds it completed or failed does nothing.
 */
export function comparisonJobWith(compute: ComputeComparison = compareInThread): JobHandler<ComparisonJobData> {
  return async (job) => {
    const id = job.data.comparisonId;
    const lease = dataSource.createQueryRunner();
    await lease.connect();
    try {
      await lease.query(`SELECT pg_advisory_lock(${LEASE_KEY_SQL})`, [id]);
      const claimed = await lease.manager
        .getRepository(ScoreComparison)
        .createQueryBuilder()
        .update()
        .set({ status: 'running', progress: () => 'greatest(progress, 0.01)' })
        .where(`id = :id AND status IN ('queued', 'running')`, { id })
        .execute();
      if (claimed.affected !== 1) return;
      if (job.retryCount > 0) {
        await appendAudit({
          action: 'comparison.requeued',
          targetType: 'score_comparison',
          targetId: id,
          details: { attempt: job.retryCount + 1, reason: 'the process computing it stopped' },
        });
        logger.warn({ comparisonId: id, attempt: job.retryCount + 1 }, 'computing a comparison again');
      }
      await computeClaimed(id, compute);
    } finally {
      // Session-level locks outlive transactions: drop the lease before the connection goes back to the pool.
      await lease.query('SELECT pg_advisory_unlock_all()').catch(() => undefined);
      await lease.release();
    }
  };
}

export const comparisonJob = comparisonJobWith();

async function computeClaimed(id: string, compute: ComputeComparison): Promise<void> {
  const timer = jobDuration.startTimer({ job: 'comparison' });
  const c = await repo().findOneOrFail({ where: { id } });
  let lastWrite = 0;
  let pending: Promise<unknown> = Promise.resolve();
  // At most one progress write per PROGRESS_WRITE_MS; progress only rises (the trigger refuses a fall).
  const onProgress = (fraction: number) => {
    const now = Date.now();
    if (now - lastWrite < PROGRESS_WRITE_MS) return;
    lastWrite = now;
    const p = Math.min(0.99, Math.max(0, fraction));
    pending = pending.then(() =>
      repo()
        .createQueryBuilder()
        .update()
        .set({ progress: p })
        .where(`id = :id AND status = 'running' AND progress < :p`, { id, p })
        .execute()
        .catch(() => undefined),
    );
  };
  let answer: ComparisonAnswer;
  try {
    // A thread that dies (or a pool ended by a stopping process) throws: the job fails and pg-boss retries it.
    answer = await compute(
      {
        firstScoreVersionId: c.firstScoreVersionId,
        secondScoreVersionId: c.secondScoreVersionId,
        cohortVersionId: c.cohortVersionId,
        settings: c.settings,
      },
      onProgress,
    );
  } finally {
    await pending;
  }
  await dataSource.transaction(async (m) => {
    const guarded = () =>
      m.getRepository(ScoreComparison).createQueryBuilder().update().where(`id = :id AND status = 'running'`, { id });
    if (answer.ok) {
      const resultsSha256 = comparisonResultsSha256(answer.results);
      const details = {
        inputsSha256: answer.inputsSha256,
        resultsSha256,
        engineVersion: answer.results.engineVersion,
      };
      // Idempotent: only a comparison still 'running' takes a result, so a second attempt never stores a second one.
      const stored = await guarded()
        .set({
          status: 'completed',
          progress: 1,
          results: answer.results,
          engineVersion: answer.results.engineVersion,
          inputsSha256: answer.inputsSha256,
          resultsSha256,
          completedAt: () => 'now()',
        })
        .execute();
      if (stored.affected === 1)
        await appendAudit({ action: 'comparison.completed', targetType: 'score_comparison', targetId: id, details }, m);
      return;
    }
    const reason = answer.inputError ? answer.message : `the comparison could not be computed: ${answer.message}`;
    const failed = await guarded()
      .set({ status: 'failed', progress: 1, error: reason, completedAt: () => 'now()' })
      .execute();
    if (failed.affected === 1)
      await appendAudit(
        { action: 'comparison.failed', targetType: 'score_comparison', targetId: id, details: { reason } },
        m,
      );
  });
  timer({ outcome: answer.ok ? 'completed' : 'failed' });
}

/** The dead-letter job of a comparison whose both attempts were cut off: it is marked failed, never left running. */
export const comparisonAbandonedJob: JobHandler<ComparisonJobData> = async (job) => {
  const id = job.data.comparisonId;
  await dataSource.transaction(async (m) => {
    const reason = `the computation of this comparison was cut off ${MAX_ATTEMPTS} times; it was not tried again`;
    const changed = await m
      .getRepository(ScoreComparison)
      .createQueryBuilder()
      .update()
      .set({ status: 'failed', progress: 1, error: reason, completedAt: () => 'now()' })
      .where(`id = :id AND status IN ('queued', 'running')`, { id })
      // Not while a live process holds its lease (it will store the outcome itself).
      .andWhere(`pg_try_advisory_xact_lock(hashtextextended('plumbline comparison ' || id::text, 0))`)
      .execute();
    if (changed.affected === 1)
      await appendAudit(
        { action: 'comparison.failed', targetType: 'score_comparison', targetId: id, details: { reason } },
        m,
      );
  });
};

/**
 * Tests and the demo seed (which start no job workers): computes the oldest waiting comparison here with `compute`,
 * then runs any dead-letter job its failures left. The comparison's id, or null if none waited.
 */
export async function processNextComparison(compute: ComputeComparison = compareInThread): Promise<string | null> {
  let ran: string | null = null;
  const handler = comparisonJobWith(compute);
  await drainJobs<ComparisonJobData>(
    JOB.comparison,
    async (job) => {
      ran = job.data.comparisonId;
      await handler(job);
    },
    1,
  );
  await drainJobs(JOB.comparisonAbandoned, comparisonAbandonedJob);
  return ran;
}
