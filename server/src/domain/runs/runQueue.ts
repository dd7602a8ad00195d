// Computing validation runs off the request path: the 'run' job (a worker thread per run, under a lease), its
// dead-letter job, the drift-rule job a completed run enqueues, storing the outcome and telling the team, and a clean
// stop handing this process's runs back to the queue. Any number of processes with job workers take runs from the
// one pg-boss queue in PostgreSQL (jobs/queue.ts); each run is computed by one of them at a time.
import { runSettingsSchema, type RunSettings } from '@shared/runs';
import { dataSource } from '../../platform/database/dataSource';
import { ValidationRun } from '../../platform/database/entities/ValidationRun';
import { appendAudit } from '../accounts/audit';
import { driftSeriesOf, storeDriftSeries } from '../drift/driftSeries';
import { loadRunInput } from './runInput';
import { evaluateAlertsForRun } from '../drift/alerts';
import { drainJobs, enqueue, JOB, type JobHandler } from '../../jobs/queue';
import { queueEmail, recipientsForRole } from '../notifications/mail';
import { computeRunResults, ENGINE_VERSION, RunInputError } from './runCompute';
import { completeCaseData } from './runMissingData';
import { computeInThread, type RunningThread } from '../../jobs/threads/pool';
import { formatCount, formatFigure } from '@shared/format';
import { logger } from '../../platform/observability/log';
import { jobDuration } from '../../platform/observability/metrics';
import { getRun, sealResults } from './runs';

/** A run whose process died is tried once more (pg-boss retryLimit 1 on the 'run' queue): two attempts in all. */
export const MAX_ATTEMPTS = 2;
const PROGRESS_WRITE_MS = 250;

// ---------------------------------------------------------------- compute

/** Runs being computed in this process, so a clean stop can end their threads and hand them back to the queue. */
const active = new Map<string, RunningThread>();
/** Runs whose threads a clean stop ended: they go back to the queue instead of failing. */
const interrupted = new Set<string>();

/** The advisory-lock key of a run's lease (the same expression in SQL: hashtextextended('plumbline run ' || id, 0)). */
const LEASE_KEY_SQL = `hashtextextended('plumbline run ' || $1::text, 0)`;

/**
 * The 'run' job: computes one run in a worker thread and stores the outcome. pg-boss hands the job to one process;
 * the run's lease (a session-level advisory lock on a connection of its own, dropped by PostgreSQL when the process
 * dies) makes a retry wait while a live process still computes it. A retry that finds the run completed or failed
 * does nothing, so a result is stored once.
 */
export const runJob: JobHandler<{ runId: string }> = async (job) => {
  const runId = job.data.runId;
  const lease = dataSource.createQueryRunner();
  await lease.connect();
  try {
    await lease.query(`SELECT pg_advisory_lock(${LEASE_KEY_SQL})`, [runId]);
    const attempt = job.retryCount + 1;
    const claimed: { id: string }[] = await lease.query(
      `UPDATE validation_runs SET status = 'running', started_at = now(), progress = 0, progress_message = 'loading the cohort', attempt = $2
       WHERE id = $1 AND status IN ('queued', 'running') RETURNING id`,
      [runId, attempt],
    );
    if (!claimed.length) return;
    if (attempt > 1) {
      await appendAudit({
        action: 'run.requeued',
        targetType: 'validation_run',
        targetId: runId,
        details: { attempt, reason: 'the process computing it stopped' },
      });
      logger.warn({ runId, attempt }, 'computing a run again after its process stopped');
    }
    await computeClaimedRun(runId);
  } finally {
    // Session-level locks outlive transactions: drop the lease before the connection goes back to the pool.
    await lease.query('SELECT pg_advisory_unlock_all()').catch(() => undefined);
    await lease.release();
  }
};

/** The dead-letter job of a run whose both attempts were cut off: it is marked failed, never left running. */
export const runAbandonedJob: JobHandler<{ runId: string }> = async (job) => {
  const runId = job.data.runId;
  await dataSource.transaction(async (m) => {
    const reason = `the server stopped during this run ${MAX_ATTEMPTS} times; it was not tried again`;
    const [, changed] = await m.query(
      `UPDATE validation_runs SET status = 'failed', error = $2, progress_message = 'failed', finished_at = now() WHERE id = $1 AND status IN ('queued', 'running')
         AND pg_try_advisory_xact_lock(hashtextextended('plumbline run ' || id::text, 0))`,
      [runId, reason],
    );
    if (changed === 1)
      await appendAudit(
        { action: 'run.failed', targetType: 'validation_run', targetId: runId, details: { reason } },
        m,
      );
  });
};

/** Tests and the seed: computes the oldest waiting run here (and its drift-rule job); the run id, or null if none. */
export async function processNextRun(): Promise<string | null> {
  let ran: string | null = null;
  await drainJobs<{ runId: string }>(
    JOB.run,
    async (job) => {
      ran = job.data.runId;
      await runJob(job);
    },
    1,
  );
  if (ran) await drainJobs(JOB.driftRules, driftRulesJob);
  return ran;
}

/** The 'drift-rules' job: the score's drift rules look at the new period (enqueued with the completed run). */
export const driftRulesJob: JobHandler<{ runId: string }> = async (job) => {
  await evaluateAlertsForRun(job.data.runId);
};

async function computeClaimedRun(claimed: string): Promise<string> {
  const timer = jobDuration.startTimer({ job: 'run' });
  let outcome = 'completed';
  const run = await dataSource.getRepository(ValidationRun).findOneOrFail({ where: { id: claimed } });

  let lastWrite = 0;
  let lastMessage = '';
  let pending: Promise<unknown> = Promise.resolve();
  // A new step is always written; repeated ticks of the same step at most every PROGRESS_WRITE_MS.
  const onProgress = (fraction: number, message: string) => {
    const now = Date.now();
    if (message === lastMessage && now - lastWrite < PROGRESS_WRITE_MS && fraction < 1) return;
    lastWrite = now;
    lastMessage = message;
    pending = pending.then(() =>
      dataSource
        .query(`UPDATE validation_runs SET progress = $2, progress_message = $3 WHERE id = $1 AND status = 'running'`, [
          claimed,
          Math.min(0.99, Math.max(0, fraction)),
          message,
        ])
        .catch(() => undefined),
    );
  };

  try {
    // The thread loads the score and the cohort itself, through its own connection.
    const thread = computeInThread(
      { task: 'run', scoreVersionId: run.scoreVersionId, cohortVersionId: run.cohortVersionId, settings: run.settings },
      onProgress,
    );
    active.set(claimed, thread);
    const { results: raw, inputsSha256: inputsHash, drift } = await thread.result;
    active.delete(claimed);
    await pending;
    const sealed = sealResults(raw);
    await dataSource.transaction(async (m) => {
      if (drift)
        await storeDriftSeries(
          (sql, params) => m.query(sql, params),
          run.scoreVersionId,
          run.cohortVersionId,
          claimed,
          drift,
        );
      // Idempotent: only a run still 'running' takes a result, so a second attempt never stores a second one.
      const [, changed] = await m.query(
        `UPDATE validation_runs SET status = 'completed', progress = 1, progress_message = 'completed', results = $2::jsonb, engine_version = $3,
           inputs_sha256 = $4, results_sha256 = $5, finished_at = now() WHERE id = $1 AND status = 'running'`,
        [
          claimed,
          JSON.stringify(sealed.results),
          sealed.results.overall.engineVersion ?? ENGINE_VERSION,
          inputsHash,
          sealed.resultsSha256,
        ],
      );
      if (changed !== 1) return;
      await appendAudit(
        {
          action: 'run.completed',
          targetType: 'validation_run',
          targetId: claimed,
          details: { inputsSha256: inputsHash, resultsSha256: sealed.resultsSha256, engineVersion: ENGINE_VERSION },
        },
        m,
      );
      // Drift rules of the score look at the new period, as a job of its own: a failure there never fails the run.
      await enqueue(m, JOB.driftRules, { runId: claimed });
    });
  } catch (err) {
    const stopping = interrupted.delete(claimed);
    active.delete(claimed);
    await pending;
    if (stopping) {
      // A clean shutdown interrupted the computation: the run waits in the queue with a fresh job, not a failure.
      await dataSource.transaction(async (m) => {
        const [, changed] = await m.query(
          `UPDATE validation_runs SET status = 'queued', progress = 0, progress_message = 'waiting in the queue (server restarted)' WHERE id = $1 AND status = 'running'`,
          [claimed],
        );
        if (changed === 1) await enqueue(m, JOB.run, { runId: claimed });
      });
      timer({ outcome: 'interrupted' });
      return claimed;
    }
    outcome = 'failed';
    const reason =
      err instanceof RunInputError
        ? (err as Error).message
        : `the computation failed: ${(err as Error).message ?? String(err)}`;
    await dataSource.transaction(async (m) => {
      await m.query(
        `UPDATE validation_runs SET status = 'failed', error = $2, progress_message = 'failed', finished_at = now() WHERE id = $1 AND status = 'running'`,
        [claimed, reason],
      );
      await appendAudit(
        { action: 'run.failed', targetType: 'validation_run', targetId: claimed, details: { reason } },
        m,
      );
    });
  }
  timer({ outcome });
  await notifyRunFinished(claimed);
  return claimed;
}

async function notifyRunFinished(runId: string): Promise<void> {
  try {
    const run = await getRun(runId, dataSource.manager, { adequacy: false });
    const creator: { email: string }[] = run.createdBy
      ? await dataSource.query('SELECT email FROM users WHERE id = $1 AND active', [run.createdBy])
      : [];
    const to = [...new Set([...(await recipientsForRole('statistician')), ...creator.map((c) => c.email)])];
    if (to.length === 0) return;
    const what = `${run.scoreName} v${run.scoreVersion} on ${run.cohortName} v${run.cohortVersion}${run.cohortLabel ? ` (${run.cohortLabel})` : ''}`;
    const h = run.headline;
    const text =
      run.status === 'completed'
        ? `The validation run of ${what} has completed.\n\nPatients: ${formatCount(h?.n)}, events: ${formatCount(h?.events)}, AUC: ${formatFigure('auc', h?.auc)}, O/E: ${formatFigure('oe', h?.oe)}.\n\nOpen it in Plumbline: /runs/${run.id}\n\nThis is a statistical check of past performance on local data, not medical advice.`
        : `The validation run of ${what} failed.\n\nReason: ${run.error}\n\nOpen it in Plumbline: /runs/${run.id}`;
    await queueEmail({ to, subject: `Validation run ${run.status}: ${what}`, text, kind: `run.${run.status}` });
  } catch (err) {
    // E-mail is a courtesy; the run's outcome is already stored and audited.
    logger.error({ err, runId }, 'could not queue the e-mail for a finished run');
  }
}

/**
 * Computes a run synchronously in this thread and stores it completed (the demo seed uses this; the API never does,
 * it queues). Same computation, same hashes, same audit entries as the queue.
 */
export async function recordRunNow(
  actorId: string | null,
  scoreVersionId: string,
  cohortVersionId: string,
  settings: RunSettings,
  details: Record<string, unknown> = {},
): Promise<string> {
  const parsed = runSettingsSchema.parse(settings);
  const { input, inputsSha256: inputsHash } = await loadRunInput({ scoreVersionId, cohortVersionId, settings: parsed });
  const sealed = sealResults(computeRunResults(input));
  const drift = driftSeriesOf(input.score, completeCaseData(input.score, input.data));
  return dataSource.transaction(async (m) => {
    await m.query('UPDATE score_versions SET locked = true WHERE id = $1 AND NOT locked', [scoreVersionId]);
    const rows: { id: string }[] = await m.query(
      `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, progress_message, results, engine_version,
         inputs_sha256, results_sha256, created_by, started_at, finished_at)
       VALUES ($1, $2, $3::jsonb, 'completed', 1, 'completed', $4::jsonb, $5, $6, $7, $8, now(), now()) RETURNING id`,
      [
        scoreVersionId,
        cohortVersionId,
        JSON.stringify(parsed),
        JSON.stringify(sealed.results),
        ENGINE_VERSION,
        inputsHash,
        sealed.resultsSha256,
        actorId,
      ],
    );
    const id = rows[0].id;
    await storeDriftSeries((sql, params) => m.query(sql, params), scoreVersionId, cohortVersionId, id, drift);
    await appendAudit(
      {
        actorId,
        action: 'run.created',
        targetType: 'validation_run',
        targetId: id,
        details: { scoreVersionId, cohortVersionId, settings: parsed, ...details },
      },
      m,
    );
    await appendAudit(
      {
        action: 'run.completed',
        targetType: 'validation_run',
        targetId: id,
        details: {
          inputsSha256: inputsHash,
          resultsSha256: sealed.resultsSha256,
          engineVersion: ENGINE_VERSION,
          ...details,
        },
      },
      m,
    );
    return id;
  });
}

// ---------------------------------------------------------------- stopping

/** Before pg-boss stops: runs under way here end their threads and go back to the queue with a fresh job. */
export async function interruptRuns(): Promise<void> {
  for (const id of active.keys()) interrupted.add(id);
  await Promise.all([...active.values()].map((t) => t.terminate()));
}
