// Score comparisons: two score versions on the same patients of one cohort version. Created in one request as a
// queued row with its job (comparisonQueue.ts computes it in a worker thread and stores it completed with its hashes,
// or failed), read, listed, and named by a review once completed. A row moves only forward and a completed or failed
// one never changes (trigger in migration 1765000027000-ComparisonJobs).
import {
  isCompletedComparison,
  scoreComparisonSettingsSchema,
  type CompletedScoreComparison,
  type CreateScoreComparisonRequest,
  type ScoreComparisonDetail,
  type ScoreComparisonListQuery,
  type ScoreComparisonStatus,
  type ScoreComparisonSummary,
} from '@shared/scoreComparison';
import type { ReproduceReport } from '@shared/runs';
import type { EntityManager } from 'typeorm';
import { dataSource } from '../../platform/database/dataSource';
import { ScoreComparison } from '../../platform/database/entities/ScoreComparison';
import { ScoreVersion } from '../../platform/database/entities/ScoreVersion';
import { CohortVersion } from '../../platform/database/entities/CohortVersion';
import { enqueue, JOB } from '../../jobs/queue';
import { compareInThread } from '../../jobs/threads/pool';
import type { AuthUser } from '../accounts/actor';
import { appendAudit } from '../accounts/audit';
import { freezeScoreVersion } from '../scores/freeze';
import { cohortColumnNames } from '../cohorts/cohortData';
import { conflict, DomainError, invalid, notFound } from '../errors';
import { comparisonResultsSha256 } from './comparisonCompute';
import type { ComputeComparison } from './comparisonQueue';
import { ENGINE_VERSION } from '../runs/runCompute';
import { cohortOfRow } from '../runs/runJoin';

/** The cohort columns a score version reads: its formula's predictors, or its supplied probability column. */
function columnsOf(sv: ScoreVersion): string[] {
  if (sv.mode === 'formula') return [...new Set((sv.model?.predictors ?? []).map((p) => p.column))];
  return sv.probabilityColumn ? [sv.probabilityColumn] : [];
}

/**
 * Checks the request, then in one transaction freezes both score versions, stores the comparison queued, audits it and
 * enqueues its job: the request never waits for the computation.
 */
export async function createComparison(
  actor: AuthUser,
  body: CreateScoreComparisonRequest,
  ip: string | null = null,
): Promise<ScoreComparisonDetail> {
  if (body.firstScoreVersionId === body.secondScoreVersionId) throw invalid('choose two different score versions');
  const settings = scoreComparisonSettingsSchema.parse(body.settings ?? {});
  const svRepo = dataSource.getRepository(ScoreVersion);
  const first = await svRepo.findOne({ where: { id: body.firstScoreVersionId } });
  const second = await svRepo.findOne({ where: { id: body.secondScoreVersionId } });
  if (!first || !second) throw notFound('score version');
  const cv = await dataSource.getRepository(CohortVersion).findOne({ where: { id: body.cohortVersionId } });
  if (!cv) throw notFound('cohort version');
  const cols = await cohortColumnNames(cv.id);
  const present = new Set([...cols.predictors, ...cols.subgroups]);
  for (const [which, sv] of [
    ['first', first],
    ['second', second],
  ] as const) {
    const missing = columnsOf(sv).filter((c) => !present.has(c));
    if (missing.length)
      throw invalid(
        `the cohort version lacks ${missing.map((c) => `"${c}"`).join(', ')}, which the ${which} score version needs`,
      );
  }

  const id = await dataSource.transaction(async (m) => {
    for (const sv of [first, second]) await freezeScoreVersion(m, sv, actor, ip, 'first score comparison');
    const saved = await m.getRepository(ScoreComparison).save(
      m.getRepository(ScoreComparison).create({
        firstScoreVersionId: first.id,
        secondScoreVersionId: second.id,
        cohortVersionId: cv.id,
        settings,
        status: 'queued',
        progress: 0,
        createdBy: actor.id,
      }),
    );
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'comparison.created',
        targetType: 'score_comparison',
        targetId: saved.id,
        sourceIp: ip,
        details: {
          firstScoreVersionId: first.id,
          secondScoreVersionId: second.id,
          cohortVersionId: cv.id,
          settings,
        },
      },
      m,
    );
    await enqueue(m, JOB.comparison, { comparisonId: saved.id });
    return saved.id;
  });
  return getComparison(id);
}

// ---------------------------------------------------------------- read

const SUMMARY_SQL = `
  SELECT sc.id, sc.first_score_version_id, sc.second_score_version_id, sc.cohort_version_id, sc.engine_version,
         sc.status, sc.progress, sc.error, sc.created_by, sc.created_at, sc.completed_at, u.name AS created_by_name,
         sv1.version AS first_version, s1.id AS first_score_id, s1.name AS first_score_name,
         sv2.version AS second_version, s2.id AS second_score_id, s2.name AS second_score_name,
         cv.version AS cohort_version, cv.label AS cohort_label, c.id AS cohort_id, c.name AS cohort_name,
         (sc.results->>'n')::int AS n, (sc.results->'auc'->'difference'->>'estimate')::float8 AS auc_difference,
         (sc.results->'auc'->>'pValue')::float8 AS p_value
  FROM score_comparisons sc
  JOIN score_versions sv1 ON sv1.id = sc.first_score_version_id JOIN scores s1 ON s1.id = sv1.score_id
  JOIN score_versions sv2 ON sv2.id = sc.second_score_version_id JOIN scores s2 ON s2.id = sv2.score_id
  JOIN cohort_versions cv ON cv.id = sc.cohort_version_id JOIN cohorts c ON c.id = cv.cohort_id
  LEFT JOIN users u ON u.id = sc.created_by`;

type Row = Record<string, unknown>;

const iso = (v: unknown) => (v ? new Date(v as string).toISOString() : null);

function toSummary(r: Row): ScoreComparisonSummary {
  const status = r.status as ScoreComparisonStatus;
  return {
    id: r.id as string,
    first: {
      scoreVersionId: r.first_score_version_id as string,
      scoreId: r.first_score_id as string,
      scoreName: r.first_score_name as string,
      version: r.first_version as number,
    },
    second: {
      scoreVersionId: r.second_score_version_id as string,
      scoreId: r.second_score_id as string,
      scoreName: r.second_score_name as string,
      version: r.second_version as number,
    },
    ...cohortOfRow(r),
    status,
    progress: Number(r.progress),
    error: (r.error as string) ?? null,
    engineVersion: (r.engine_version as string) ?? null,
    createdBy: (r.created_by as string) ?? null,
    createdByName: (r.created_by_name as string) ?? null,
    createdAt: iso(r.created_at)!,
    completedAt: iso(r.completed_at),
    headline:
      status === 'completed'
        ? { n: r.n as number, aucDifference: r.auc_difference as number, pValue: r.p_value as number }
        : null,
  };
}

export async function listComparisons(
  q: ScoreComparisonListQuery,
): Promise<{ total: number; comparisons: ScoreComparisonSummary[] }> {
  const where: string[] = [];
  const args: unknown[] = [];
  if (q.scoreVersion) {
    args.push(q.scoreVersion);
    where.push(`(sc.first_score_version_id = $${args.length} OR sc.second_score_version_id = $${args.length})`);
  }
  if (q.cohortVersion) {
    args.push(q.cohortVersion);
    where.push(`sc.cohort_version_id = $${args.length}`);
  }
  const filter = where.length ? ` WHERE ${where.join(' AND ')}` : '';
  const [{ n }]: { n: number }[] = await dataSource.query(
    `SELECT count(*)::int AS n FROM score_comparisons sc${filter}`,
    args,
  );
  const rows: Row[] = await dataSource.query(
    `${SUMMARY_SQL}${filter} ORDER BY sc.created_at DESC, sc.id LIMIT ${q.limit} OFFSET ${q.offset}`,
    args,
  );
  return { total: n, comparisons: rows.map(toSummary) };
}

const pause = (ms: number) => new Promise<void>((r) => setTimeout(r, ms));
const waiting = (status: ScoreComparisonStatus) => status === 'queued' || status === 'running';

/**
 * One comparison; with `waitSeconds`, one that waits or computes is answered when it ends (or after that long). Its job
 * may run in another process: the row is what every process shares.
 */
export async function getComparison(
  id: string,
  manager: EntityManager = dataSource.manager,
  waitSeconds = 0,
): Promise<ScoreComparisonDetail> {
  const deadline = Date.now() + waitSeconds * 1000;
  const repo = manager.getRepository(ScoreComparison);
  let stored = await repo.findOne({ where: { id } });
  if (!stored) throw notFound('score comparison');
  while (waiting(stored.status) && Date.now() < deadline) {
    await pause(Math.min(250, Math.max(1, deadline - Date.now())));
    stored = await repo.findOneOrFail({ where: { id } });
  }
  const rows: Row[] = await manager.query(`${SUMMARY_SQL} WHERE sc.id = $1`, [id]);
  const r = stored.status === 'completed' ? stored.results : null;
  return {
    ...toSummary(rows[0]),
    // What changes as the job goes on is taken from the one entity read, so status and results always agree.
    status: stored.status,
    progress: stored.progress,
    error: stored.error,
    engineVersion: stored.engineVersion,
    completedAt: iso(stored.completedAt),
    headline: r ? { n: r.n, aucDifference: r.auc.difference.estimate, pValue: r.auc.pValue } : null,
    settings: stored.settings,
    results: stored.results,
    inputsSha256: stored.inputsSha256?.trim() ?? null,
    resultsSha256: stored.resultsSha256?.trim() ?? null,
  };
}

/** A comparison that must be completed (a review names only such a one); a conflict otherwise. */
export async function getCompletedComparison(
  id: string,
  manager: EntityManager = dataSource.manager,
): Promise<CompletedScoreComparison> {
  const c = await getComparison(id, manager);
  if (!isCompletedComparison(c)) throw conflict(`score comparison ${id} is ${c.status}, not completed`);
  return c;
}

// ---------------------------------------------------------------- reproduce

/** Re-computes a stored comparison from its inputs (in a worker thread) and compares the results hash bit for bit. */
export async function reproduceComparison(
  actor: AuthUser,
  id: string,
  ip: string | null = null,
  compute: ComputeComparison = compareInThread,
): Promise<ReproduceReport> {
  const stored = await dataSource.getRepository(ScoreComparison).findOne({ where: { id } });
  if (!stored) throw notFound('score comparison');
  if (stored.status !== 'completed' || !stored.results || !stored.resultsSha256 || !stored.inputsSha256)
    throw conflict(
      stored.status === 'failed'
        ? 'this comparison failed and has no results to compute again'
        : 'this comparison has not been computed yet; it can be computed again once it has completed',
    );
  const answer = await compute(
    {
      firstScoreVersionId: stored.firstScoreVersionId,
      secondScoreVersionId: stored.secondScoreVersionId,
      cohortVersionId: stored.cohortVersionId,
      settings: stored.settings,
    },
    () => {},
  );
  if (!answer.ok) throw new DomainError('failed', `the comparison could not be computed again: ${answer.message}`);
  const recomputed = comparisonResultsSha256(answer.results);
  const storedNow = comparisonResultsSha256(stored.results);
  const storedSha = stored.resultsSha256.trim();
  const storedInputs = stored.inputsSha256.trim();
  const match = recomputed === storedSha && storedNow === storedSha;
  const report: ReproduceReport = {
    match,
    storedSha256: storedSha,
    recomputedSha256: recomputed,
    engineVersionStored: stored.engineVersion ?? ENGINE_VERSION,
    engineVersionNow: ENGINE_VERSION,
  };
  if (answer.inputsSha256 !== storedInputs)
    report.differences = [{ path: '(inputs)', stored: storedInputs, recomputed: answer.inputsSha256 }];
  await appendAudit({
    actorId: actor.id,
    actorEmail: actor.email,
    action: 'comparison.reproduced',
    targetType: 'score_comparison',
    targetId: id,
    sourceIp: ip,
    details: { match, storedSha256: storedSha, recomputedSha256: recomputed, engineVersionNow: ENGINE_VERSION },
  });
  return report;
}
