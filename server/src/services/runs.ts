// Validation runs: creating them, the persisted job queue that computes them off the request path, reading,
// reproducing and comparing them. A completed run is immutable (database trigger in migration 1764633800000-Runs).
import type { ColumnSummary } from '@shared/cohorts';
import { periodGroupingOf } from '@shared/periodGrouping';
import type { EntityManager } from 'typeorm';
import { runSettingsSchema, type CompareMetric, type ReproduceReport, type RunComparison, type RunDetail, type RunListQuery, type RunOptions, type RunResults, type RunSettings, type RunStage, type RunStatus, type RunSummary } from '@shared/runs';
import { dataSource } from '../db/dataSource';
import { ScoreVersion } from '../entities/ScoreVersion';
import { CohortVersion } from '../entities/CohortVersion';
import { ValidationRun } from '../entities/ValidationRun';
import type { AuthUser } from '../middleware/auth';
import { badRequest, conflict, notFound } from '../middleware/errors';
import { runAdequacy } from './adequacy';
import { appendAudit } from './audit';
import { cohortColumnNames } from './cohortData';
import { driftSeriesOf, storeDriftSeries } from './driftSeries';
import { loadRunInput } from './runInput';
export { loadRunInput };
import { evaluateAlertsForRun } from './drift';
import { drainJobs, enqueue, JOB, type JobHandler } from './jobs';
import { queueEmail, recipientsForRole } from './mail';
import { asStored, computeRunResults, ENGINE_VERSION, resultsSha256, RunInputError } from './runCompute';
import { completedRunRecord } from './runRecordCache';
import { computeInThread, type RunningThread } from '../workers/pool';
import { formatCount, formatFigure } from '@shared/format';
import { logger } from '../observability/log';
import { jobDuration } from '../observability/metrics';

/** A run whose process died is tried once more (pg-boss retryLimit 1 on the 'run' queue): two attempts in all. */
export const MAX_ATTEMPTS = 2;
const PROGRESS_WRITE_MS = 250;

// ---------------------------------------------------------------- create

export interface CreateRunInput {
  scoreVersionId: string;
  cohortVersionId: string;
  settings: RunSettings;
}

/** Column names of the cohort's subgroups and predictors, and whether it has periods (read from its first block). */
async function cohortColumns(m: EntityManager, cohortVersionId: string): Promise<{ subgroups: Set<string>; hasDates: boolean }> {
  const cols = await cohortColumnNames(cohortVersionId, m);
  return { subgroups: new Set([...cols.subgroups, ...cols.predictors]), hasDates: cols.hasDates };
}

export async function createRun(actor: AuthUser, input: CreateRunInput, ip: string | null = null): Promise<RunDetail> {
  const settings = runSettingsSchema.parse(input.settings);
  const id = await dataSource.transaction(async (m) => {
    const sv = await m.getRepository(ScoreVersion).findOne({ where: { id: input.scoreVersionId } });
    if (!sv) throw notFound('score version');
    const cv = await m.getRepository(CohortVersion).findOne({ where: { id: input.cohortVersionId } });
    if (!cv) throw notFound('cohort version');
    const cols = await cohortColumns(m, cv.id);
    const missing = settings.subgroupColumns.filter((c) => !cols.subgroups.has(c));
    if (missing.length) throw badRequest(`the cohort version has no column ${missing.map((c) => `"${c}"`).join(', ')} to group by`);
    if (settings.timeGrouping !== 'none' && !cols.hasDates) throw badRequest('time grouping needs event dates, and this cohort version has none');

    // The formula is frozen from the moment a run uses it (score_versions trigger keeps it so).
    if (!sv.locked) {
      await m.query('UPDATE score_versions SET locked = true WHERE id = $1 AND NOT locked', [sv.id]);
      await appendAudit({ actorId: actor.id, actorEmail: actor.email, action: 'score_version.locked', targetType: 'score_version', targetId: sv.id, sourceIp: ip, details: { reason: 'first validation run' } }, m);
    }
    const run = await m.getRepository(ValidationRun).save(
      m.getRepository(ValidationRun).create({ scoreVersionId: sv.id, cohortVersionId: cv.id, settings, status: 'queued', progress: 0, progressMessage: 'waiting in the queue', createdBy: actor.id, attempt: 1 }),
    );
    await appendAudit(
      { actorId: actor.id, actorEmail: actor.email, action: 'run.created', targetType: 'validation_run', targetId: run.id, sourceIp: ip, details: { scoreVersionId: sv.id, cohortVersionId: cv.id, settings } },
      m,
    );
    await enqueue(m, JOB.run, { runId: run.id });
    return run.id;
  });
  return getRun(id);
}

// ---------------------------------------------------------------- read

// The tables a run summary reads, with the current review and the latest signature of each run (the list's filters
// and its count read the same joins).
const SUMMARY_FROM = `
  FROM validation_runs r
  JOIN score_versions sv ON sv.id = r.score_version_id
  JOIN scores s ON s.id = sv.score_id
  JOIN cohort_versions cv ON cv.id = r.cohort_version_id
  JOIN cohorts c ON c.id = cv.cohort_id
  LEFT JOIN users u ON u.id = r.created_by
  LEFT JOIN LATERAL (SELECT rr.verdict, rr.created_at FROM run_reviews rr WHERE rr.run_id = r.id AND rr.superseded_by IS NULL) rv ON true
  LEFT JOIN LATERAL (SELECT g.meaning, g.signed_at, g.printed_name FROM signatures g WHERE g.run_id = r.id ORDER BY g.signed_at DESC LIMIT 1) sg ON true`;

const SUMMARY_SELECT = `
  SELECT r.id, r.status, r.progress, r.progress_message, r.error, r.engine_version, r.created_by, r.created_at, r.started_at,
         r.finished_at, r.attempt, r.score_version_id, r.cohort_version_id,
         sv.version AS score_version, s.id AS score_id, s.name AS score_name,
         cv.version AS cohort_version, cv.label AS cohort_label, c.id AS cohort_id, c.name AS cohort_name,
         u.name AS created_by_name, rv.verdict AS review_verdict, rv.created_at AS reviewed_at,
         sg.meaning AS signoff_meaning, sg.signed_at AS signed_at, sg.printed_name AS signed_by,
         CASE WHEN r.status = 'completed' THEN jsonb_build_object(
           'n', ov.o->'n', 'events', ov.o->'events', 'auc', ov.o->'auc'->'estimate', 'oe', ov.o->'oe'->'estimate') END AS headline
  ${SUMMARY_FROM}
  -- results is a large TOASTed jsonb: every r.results->… de-compresses all of it again, so 'overall' is taken once
  -- (OFFSET 0 keeps the planner from folding the sub-select back into four separate de-compressions).
  LEFT JOIN LATERAL (SELECT r.results->'overall' AS o OFFSET 0) ov ON true`;

/** Where a run stands in governance, as the list filters it. */
const STAGE_SQL: Record<RunStage, string> = {
  'not reviewed': `r.status = 'completed' AND rv.verdict IS NULL`,
  'awaiting sign-off': `rv.verdict IS NOT NULL AND (sg.meaning IS NULL OR sg.signed_at < rv.created_at)`,
  approved: `sg.meaning = 'approve for clinical use' AND sg.signed_at >= rv.created_at`,
  returned: `sg.meaning = 'return to statistician' AND sg.signed_at >= rv.created_at`,
  revoked: `sg.meaning = 'revoke approval'`,
};

type SummaryRow = Record<string, unknown>;
const iso = (v: unknown) => (v ? new Date(v as string).toISOString() : null);

function toSummary(r: SummaryRow): RunSummary {
  return {
    id: r.id as string,
    scoreId: r.score_id as string,
    scoreName: r.score_name as string,
    scoreVersionId: r.score_version_id as string,
    scoreVersion: r.score_version as number,
    cohortId: r.cohort_id as string,
    cohortName: r.cohort_name as string,
    cohortVersionId: r.cohort_version_id as string,
    cohortVersion: r.cohort_version as number,
    cohortLabel: (r.cohort_label as string) ?? '',
    status: r.status as RunStatus,
    progress: Number(r.progress),
    progressMessage: (r.progress_message as string) ?? null,
    error: (r.error as string) ?? null,
    engineVersion: (r.engine_version as string) ?? null,
    createdBy: (r.created_by as string) ?? null,
    createdByName: (r.created_by_name as string) ?? null,
    createdAt: iso(r.created_at)!,
    startedAt: iso(r.started_at),
    finishedAt: iso(r.finished_at),
    attempt: r.attempt as number,
    headline: (r.headline as RunSummary['headline']) ?? null,
    review: r.review_verdict ? { verdict: r.review_verdict as string, reviewedAt: iso(r.reviewed_at)! } : null,
    signoff: r.signoff_meaning ? { meaning: r.signoff_meaning as string, signedAt: iso(r.signed_at)!, signedBy: (r.signed_by as string) ?? '' } : null,
  };
}

export async function listRuns(q: RunListQuery): Promise<{ total: number; runs: RunSummary[] }> {
  const where: string[] = [];
  const args: unknown[] = [];
  const add = (sql: string, v: unknown) => {
    args.push(v);
    where.push(sql.replace('?', `$${args.length}`));
  };
  if (q.score) add('s.id = ?', q.score);
  if (q.scoreVersion) add('r.score_version_id = ?', q.scoreVersion);
  if (q.cohortVersion) add('r.cohort_version_id = ?', q.cohortVersion);
  if (q.status) add('r.status = ?', q.status);
  if (q.stage) where.push(`(${STAGE_SQL[q.stage]})`);
  // Words in the score, cohort, label or the name of who started it; LIKE's own wildcards are taken literally.
  if (q.search) add(`concat_ws(' ', s.name, c.name, cv.label, u.name, rv.verdict) ILIKE ?`, `%${q.search.replace(/[\\%_]/g, (ch) => `\\${ch}`)}%`);
  const filter = where.length ? ` WHERE ${where.join(' AND ')}` : '';
  const total: { n: string }[] = await dataSource.query(`SELECT count(*)::text AS n ${SUMMARY_FROM}${filter}`, args);
  const rows: SummaryRow[] = await dataSource.query(`${SUMMARY_SELECT}${filter} ORDER BY r.created_at DESC, r.id LIMIT ${q.limit} OFFSET ${q.offset}`, args);
  return { total: Number(total[0].n), runs: rows.map(toSummary) };
}

/** One run; `adequacy` (about 0.2 s of CPU the first time a run is read) only where a page will show it. */
export async function getRun(id: string, manager: EntityManager = dataSource.manager, opts: { adequacy: boolean } = { adequacy: true }): Promise<RunDetail> {
  const rows: SummaryRow[] = await manager.query(`${SUMMARY_SELECT} WHERE r.id = $1`, [id]);
  if (!rows[0]) throw notFound('validation run');
  // A completed run never changes (trigger plumbline_run_guard): read outside a transaction, its record is final and
  // is kept in memory (services/runRecordCache.ts).
  const load = () => manager.getRepository(ValidationRun).findOneOrFail({ where: { id } });
  const run = rows[0].status === 'completed' && manager === dataSource.manager ? await completedRunRecord(id, load) : await load();
  const detail: RunDetail = { ...toSummary(rows[0]), settings: run.settings, results: run.results, inputsSha256: run.inputsSha256, resultsSha256: run.resultsSha256 };
  // Derived on read (not part of the sealed results): is this cohort big enough, and how precise are its figures?
  if (opts.adequacy && run.status === 'completed') detail.adequacy = await runAdequacy(run);
  return detail;
}

/** The cohort's own periods (month or quarter), read from the period column's levels in its column summary. */
function cohortPeriods(summary: Record<string, ColumnSummary> | null): 'month' | 'quarter' | null {
  const entry = Object.entries(summary ?? {}).find(([k, v]) => k.startsWith('period (') && v.kind === 'categorical');
  if (!entry || entry[1].kind !== 'categorical') return 'month';
  return periodGroupingOf(entry[1].levels.map((l) => l.value)) ?? 'month';
}

/** Score versions and cohort versions a run may combine, for the start form. */
export async function runOptions(): Promise<RunOptions> {
  const svs: Record<string, unknown>[] = await dataSource.query(
    `SELECT sv.id, sv.score_id, s.name AS score_name, sv.version, sv.mode, sv.model, sv.probability_column, sv.clinical_status
     FROM score_versions sv JOIN scores s ON s.id = sv.score_id ORDER BY s.name, sv.version DESC`,
  );
  const cvs: Record<string, unknown>[] = await dataSource.query(
    `SELECT cv.id, cv.cohort_id, c.name AS cohort_name, cv.version, cv.label, cv.row_count, cv.events, cv.created_at, cv.column_summary,
            (SELECT b.sub_names FROM cohort_row_blocks b WHERE b.cohort_version_id = cv.id ORDER BY b.block_no LIMIT 1) AS subgroups,
            EXISTS (SELECT 1 FROM cohort_row_blocks b WHERE b.cohort_version_id = cv.id AND b.dated_count > 0) AS has_dates
     FROM cohort_versions cv JOIN cohorts c ON c.id = cv.cohort_id ORDER BY c.name, cv.version DESC`,
  );
  return {
    scoreVersions: svs.map((r) => {
      const model = r.model as { predictors?: { column: string }[] } | null;
      return {
        id: r.id as string,
        scoreId: r.score_id as string,
        scoreName: r.score_name as string,
        version: r.version as number,
        mode: r.mode as 'formula' | 'supplied',
        clinicalStatus: r.clinical_status as string,
        columns: r.mode === 'formula' ? [...new Set((model?.predictors ?? []).map((p) => p.column))] : [r.probability_column as string],
      };
    }),
    cohortVersions: cvs.map((r) => ({
      id: r.id as string,
      cohortId: r.cohort_id as string,
      cohortName: r.cohort_name as string,
      version: r.version as number,
      label: (r.label as string) ?? '',
      rowCount: r.row_count as number,
      events: r.events as number,
      groupColumns: [...((r.subgroups as string[] | null) ?? [])].sort(),
      hasDates: r.has_dates as boolean,
      periods: r.has_dates ? cohortPeriods(r.column_summary as Record<string, ColumnSummary> | null) : null,
      createdAt: iso(r.created_at)!,
    })),
  };
}

// ---------------------------------------------------------------- compute

/** The stored form of a finished computation: results exactly as jsonb will hold them, and their hash. */
export function sealResults(results: RunResults): { results: RunResults; resultsSha256: string } {
  const stored = asStored(results);
  return { results: stored, resultsSha256: resultsSha256(stored) };
}

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
      await appendAudit({ action: 'run.requeued', targetType: 'validation_run', targetId: runId, details: { attempt, reason: 'the process computing it stopped' } });
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
    if (changed === 1) await appendAudit({ action: 'run.failed', targetType: 'validation_run', targetId: runId, details: { reason } }, m);
  });
};

/** Tests and the seed: computes the oldest waiting run here (and its drift-rule job); the run id, or null if none. */
export async function processNextRun(): Promise<string | null> {
  let ran: string | null = null;
  await drainJobs<{ runId: string }>(JOB.run, async (job) => {
    ran = job.data.runId;
    await runJob(job);
  }, 1);
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
        .query(`UPDATE validation_runs SET progress = $2, progress_message = $3 WHERE id = $1 AND status = 'running'`, [claimed, Math.min(0.99, Math.max(0, fraction)), message])
        .catch(() => undefined),
    );
  };

  try {
    // The thread loads the score and the cohort itself, through its own connection.
    const thread = computeInThread({ task: 'run', scoreVersionId: run.scoreVersionId, cohortVersionId: run.cohortVersionId, settings: run.settings }, onProgress);
    active.set(claimed, thread);
    const { results: raw, inputsSha256: inputsHash, drift } = await thread.result;
    active.delete(claimed);
    await pending;
    const sealed = sealResults(raw);
    await dataSource.transaction(async (m) => {
      if (drift) await storeDriftSeries((sql, params) => m.query(sql, params), run.scoreVersionId, run.cohortVersionId, claimed, drift);
      // Idempotent: only a run still 'running' takes a result, so a second attempt never stores a second one.
      const [, changed] = await m.query(
        `UPDATE validation_runs SET status = 'completed', progress = 1, progress_message = 'completed', results = $2::jsonb, engine_version = $3,
           inputs_sha256 = $4, results_sha256 = $5, finished_at = now() WHERE id = $1 AND status = 'running'`,
        [claimed, JSON.stringify(sealed.results), sealed.results.overall.engineVersion ?? ENGINE_VERSION, inputsHash, sealed.resultsSha256],
      );
      if (changed !== 1) return;
      await appendAudit({ action: 'run.completed', targetType: 'validation_run', targetId: claimed, details: { inputsSha256: inputsHash, resultsSha256: sealed.resultsSha256, engineVersion: ENGINE_VERSION } }, m);
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
        const [, changed] = await m.query(`UPDATE validation_runs SET status = 'queued', progress = 0, progress_message = 'waiting in the queue (server restarted)' WHERE id = $1 AND status = 'running'`, [claimed]);
        if (changed === 1) await enqueue(m, JOB.run, { runId: claimed });
      });
      timer({ outcome: 'interrupted' });
      return claimed;
    }
    outcome = 'failed';
    const reason = err instanceof RunInputError ? (err as Error).message : `the computation failed: ${(err as Error).message ?? String(err)}`;
    await dataSource.transaction(async (m) => {
      await m.query(`UPDATE validation_runs SET status = 'failed', error = $2, progress_message = 'failed', finished_at = now() WHERE id = $1 AND status = 'running'`, [claimed, reason]);
      await appendAudit({ action: 'run.failed', targetType: 'validation_run', targetId: claimed, details: { reason } }, m);
    });
  }
  timer({ outcome });
  await notifyRunFinished(claimed);
  return claimed;
}

async function notifyRunFinished(runId: string): Promise<void> {
  try {
    const run = await getRun(runId, dataSource.manager, { adequacy: false });
    const creator: { email: string }[] = run.createdBy ? await dataSource.query('SELECT email FROM users WHERE id = $1 AND active', [run.createdBy]) : [];
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
export async function recordRunNow(actorId: string | null, scoreVersionId: string, cohortVersionId: string, settings: RunSettings, details: Record<string, unknown> = {}): Promise<string> {
  const parsed = runSettingsSchema.parse(settings);
  const { input, inputsSha256: inputsHash } = await loadRunInput({ scoreVersionId, cohortVersionId, settings: parsed });
  const sealed = sealResults(computeRunResults(input));
  const drift = driftSeriesOf(input.score, input.data);
  return dataSource.transaction(async (m) => {
    await m.query('UPDATE score_versions SET locked = true WHERE id = $1 AND NOT locked', [scoreVersionId]);
    const rows: { id: string }[] = await m.query(
      `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, progress_message, results, engine_version,
         inputs_sha256, results_sha256, created_by, started_at, finished_at)
       VALUES ($1, $2, $3::jsonb, 'completed', 1, 'completed', $4::jsonb, $5, $6, $7, $8, now(), now()) RETURNING id`,
      [scoreVersionId, cohortVersionId, JSON.stringify(parsed), JSON.stringify(sealed.results), ENGINE_VERSION, inputsHash, sealed.resultsSha256, actorId],
    );
    const id = rows[0].id;
    await storeDriftSeries((sql, params) => m.query(sql, params), scoreVersionId, cohortVersionId, id, drift);
    await appendAudit({ actorId, action: 'run.created', targetType: 'validation_run', targetId: id, details: { scoreVersionId, cohortVersionId, settings: parsed, ...details } }, m);
    await appendAudit({ action: 'run.completed', targetType: 'validation_run', targetId: id, details: { inputsSha256: inputsHash, resultsSha256: sealed.resultsSha256, engineVersion: ENGINE_VERSION, ...details } }, m);
    return id;
  });
}

// ---------------------------------------------------------------- stopping

/** Before pg-boss stops: runs under way here end their threads and go back to the queue with a fresh job. */
export async function interruptRuns(): Promise<void> {
  for (const id of active.keys()) interrupted.add(id);
  await Promise.all([...active.values()].map((t) => t.terminate()));
}

// ---------------------------------------------------------------- reproduce

function differences(a: unknown, b: unknown, path = '', out: ReproduceReport['differences'] = [], max = 25): NonNullable<ReproduceReport['differences']> {
  if (out!.length >= max) return out!;
  if (a === b) return out!;
  if (typeof a !== 'object' || typeof b !== 'object' || a === null || b === null || Array.isArray(a) !== Array.isArray(b)) {
    out!.push({ path: path || '(root)', stored: a, recomputed: b });
    return out!;
  }
  const keys = new Set([...Object.keys(a as object), ...Object.keys(b as object)]);
  for (const k of keys) differences((a as Record<string, unknown>)[k], (b as Record<string, unknown>)[k], Array.isArray(a) ? `${path}[${k}]` : path ? `${path}.${k}` : k, out, max);
  return out!;
}

/** Re-computes a completed run from its stored inputs (in a worker thread) and compares the hash bit for bit. */
export async function reproduceRun(actor: AuthUser, id: string, ip: string | null = null): Promise<ReproduceReport> {
  const run = await dataSource.getRepository(ValidationRun).findOne({ where: { id } });
  if (!run) throw notFound('validation run');
  if (run.status !== 'completed' || !run.results || !run.resultsSha256) throw conflict(`only a completed run can be reproduced; this one is ${run.status}`);
  const outcome = await computeInThread({ task: 'run', scoreVersionId: run.scoreVersionId, cohortVersionId: run.cohortVersionId, settings: run.settings }).result;
  const inputsHash = outcome.inputsSha256;
  const recomputed = sealResults(outcome.results);
  const storedNow = resultsSha256(run.results);
  const match = recomputed.resultsSha256 === run.resultsSha256 && storedNow === run.resultsSha256;
  const report: ReproduceReport = {
    match,
    storedSha256: run.resultsSha256,
    recomputedSha256: recomputed.resultsSha256,
    engineVersionStored: run.engineVersion ?? '',
    engineVersionNow: ENGINE_VERSION,
    ...(match ? {} : { differences: differences(run.results, recomputed.results) }),
  };
  if (inputsHash !== run.inputsSha256) report.differences = [{ path: '(inputs)', stored: run.inputsSha256, recomputed: inputsHash }, ...(report.differences ?? [])];
  await appendAudit({
    actorId: actor.id,
    actorEmail: actor.email,
    action: 'run.reproduced',
    targetType: 'validation_run',
    targetId: id,
    sourceIp: ip,
    details: { match, storedSha256: report.storedSha256, recomputedSha256: report.recomputedSha256, engineVersionNow: ENGINE_VERSION },
  });
  return report;
}

// ---------------------------------------------------------------- compare

const est = (e: unknown): { estimate: number; lower: number; upper: number } | null => {
  const x = e as { estimate?: number; lower?: number; upper?: number; converged?: boolean } | null | undefined;
  if (!x || x.converged === false || typeof x.estimate !== 'number') return null;
  return { estimate: x.estimate, lower: x.lower ?? NaN, upper: x.upper ?? NaN };
};

function metric(key: string, label: string, a: unknown, b: unknown): CompareMetric {
  const ea = typeof a === 'number' ? { estimate: a, lower: NaN, upper: NaN } : est(a);
  const eb = typeof b === 'number' ? { estimate: b, lower: NaN, upper: NaN } : est(b);
  const fin = (v: number | undefined) => (v !== undefined && Number.isFinite(v) ? v : null);
  return {
    key,
    label,
    a: fin(ea?.estimate),
    b: fin(eb?.estimate),
    delta: ea && eb ? eb.estimate - ea.estimate : null,
    aLower: fin(ea?.lower),
    aUpper: fin(ea?.upper),
    bLower: fin(eb?.lower),
    bUpper: fin(eb?.upper),
  };
}

export async function compareRuns(aId: string, bId: string): Promise<RunComparison> {
  const [a, b] = await Promise.all([getRun(aId, dataSource.manager, { adequacy: false }), getRun(bId, dataSource.manager, { adequacy: false })]);
  if (a.status !== 'completed' || b.status !== 'completed' || !a.results || !b.results) throw conflict('both runs must be completed to compare them');
  const oa = a.results.overall;
  const ob = b.results.overall;
  const settingsDiffer = Object.keys({ ...a.settings, ...b.settings }).filter(
    (k) => JSON.stringify((a.settings as Record<string, unknown>)[k]) !== JSON.stringify((b.settings as Record<string, unknown>)[k]),
  );
  const strip = ({ results: _r, settings: _s, inputsSha256: _i, resultsSha256: _h, adequacy: _a, ...rest }: RunDetail): RunSummary => rest;
  return {
    a: strip(a),
    b: strip(b),
    sameScore: a.scoreId === b.scoreId,
    settingsDiffer,
    metrics: [
      metric('n', 'Patients', oa.n, ob.n),
      metric('events', 'Events', oa.events, ob.events),
      metric('eventRate', 'Event rate', oa.eventRate, ob.eventRate),
      metric('auc', 'AUC', oa.auc, ob.auc),
      metric('calibrationIntercept', 'Calibration-in-the-large', oa.calibrationIntercept, ob.calibrationIntercept),
      metric('calibrationSlope', 'Calibration slope', oa.calibrationSlope, ob.calibrationSlope),
      metric('oe', 'O/E', oa.oe, ob.oe),
      metric('brier', 'Brier score', oa.brier, ob.brier),
      metric('scaledBrier', 'Scaled Brier', oa.scaledBrier, ob.scaledBrier),
      metric('logLoss', 'Log loss (mean)', oa.logLoss, ob.logLoss),
      metric('ici', 'ICI', oa.ici, ob.ici),
      metric('e90', 'E90', oa.e90, ob.e90),
      metric('emax', 'Emax', oa.emax, ob.emax),
    ],
  };
}
