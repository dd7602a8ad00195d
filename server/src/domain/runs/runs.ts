// Validation runs: creating one (stored as queued, its job enqueued in the same transaction; runQueue.ts computes it),
// reading, reproducing and comparing them. A completed run is immutable (database trigger in migration 1764633800000-Runs).
import type { ColumnSummary } from '@shared/cohorts';
import { periodGroupingOf } from '@shared/periodGrouping';
import type { EntityManager } from 'typeorm';
import {
  runSettingsSchema,
  type CompareMetric,
  type ReproduceReport,
  type RunComparison,
  type RunDetail,
  type RunListQuery,
  type RunResults,
  type RunOptions,
  type RunSettings,
  type RunStage,
  type RunStatus,
  type RunSummary,
} from '@shared/runs';
import { dataSource } from '../../platform/database/dataSource';
import { ScoreVersion } from '../../platform/database/entities/ScoreVersion';
import { CohortVersion } from '../../platform/database/entities/CohortVersion';
import { ValidationRun } from '../../platform/database/entities/ValidationRun';
import type { AuthUser } from '../accounts/actor';
import { conflict, invalid, notFound } from '../errors';
import { runAdequacy } from './adequacy';
import { appendAudit } from '../accounts/audit';
import { freezeScoreVersion } from '../scores/freeze';
import { cohortColumnNames } from '../cohorts/cohortData';
import { enqueue, JOB } from '../../jobs/queue';
import { asStored, ENGINE_VERSION, resultsSha256 } from './runCompute';
import { completedRunRecord } from './runRecordCache';
import { computeInThread } from '../../jobs/threads/pool';
import { cohortOfRow, RUN_SCORE_COHORT_JOIN } from './runJoin';

// ---------------------------------------------------------------- create

export interface CreateRunInput {
  scoreVersionId: string;
  cohortVersionId: string;
  settings: RunSettings;
}

/** Column names of the cohort's subgroups and predictors, and whether it has periods (read from its first block). */
async function cohortColumns(
  m: EntityManager,
  cohortVersionId: string,
): Promise<{ subgroups: Set<string>; hasDates: boolean }> {
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
    if (missing.length)
      throw invalid(`the cohort version has no column ${missing.map((c) => `"${c}"`).join(', ')} to group by`);
    if (settings.siteColumn && !cols.subgroups.has(settings.siteColumn))
      throw invalid(`the cohort version has no site column "${settings.siteColumn}"`);
    if (settings.timeGrouping !== 'none' && !cols.hasDates)
      throw invalid('time grouping needs event dates, and this cohort version has none');

    await freezeScoreVersion(m, sv, actor, ip, 'first validation run');
    const run = await m.getRepository(ValidationRun).save(
      m.getRepository(ValidationRun).create({
        scoreVersionId: sv.id,
        cohortVersionId: cv.id,
        settings,
        status: 'queued',
        progress: 0,
        progressMessage: 'waiting in the queue',
        createdBy: actor.id,
        attempt: 1,
      }),
    );
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'run.created',
        targetType: 'validation_run',
        targetId: run.id,
        sourceIp: ip,
        details: { scoreVersionId: sv.id, cohortVersionId: cv.id, settings },
      },
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
  FROM ${RUN_SCORE_COHORT_JOIN}
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
    ...cohortOfRow(r),
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
    signoff: r.signoff_meaning
      ? { meaning: r.signoff_meaning as string, signedAt: iso(r.signed_at)!, signedBy: (r.signed_by as string) ?? '' }
      : null,
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
  if (q.search)
    add(
      `concat_ws(' ', s.name, c.name, cv.label, u.name, rv.verdict) ILIKE ?`,
      `%${q.search.replace(/[\\%_]/g, (ch) => `\\${ch}`)}%`,
    );
  const filter = where.length ? ` WHERE ${where.join(' AND ')}` : '';
  const total: { n: string }[] = await dataSource.query(`SELECT count(*)::text AS n ${SUMMARY_FROM}${filter}`, args);
  const rows: SummaryRow[] = await dataSource.query(
    `${SUMMARY_SELECT}${filter} ORDER BY r.created_at DESC, r.id LIMIT ${q.limit} OFFSET ${q.offset}`,
    args,
  );
  return { total: Number(total[0].n), runs: rows.map(toSummary) };
}

/** One run; `adequacy` (about 0.2 s of CPU the first time a run is read) only where a page will show it. */
export async function getRun(
  id: string,
  manager: EntityManager = dataSource.manager,
  opts: { adequacy: boolean } = { adequacy: true },
): Promise<RunDetail> {
  const rows: SummaryRow[] = await manager.query(`${SUMMARY_SELECT} WHERE r.id = $1`, [id]);
  if (!rows[0]) throw notFound('validation run');
  // A completed run never changes (trigger plumbline_run_guard): read outside a transaction, its record is final and
  // is kept in memory (domain/runs/runRecordCache.ts).
  const load = () => manager.getRepository(ValidationRun).findOneOrFail({ where: { id } });
  const run =
    rows[0].status === 'completed' && manager === dataSource.manager
      ? await completedRunRecord(id, load)
      : await load();
  const detail: RunDetail = {
    ...toSummary(rows[0]),
    settings: run.settings,
    results: run.results,
    inputsSha256: run.inputsSha256,
    resultsSha256: run.resultsSha256,
  };
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
            cv.mapping->'predictorsWithGaps' AS gap_columns,
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
        columns:
          r.mode === 'formula'
            ? [...new Set((model?.predictors ?? []).map((p) => p.column))]
            : [r.probability_column as string],
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
      predictorsWithGaps: Array.isArray(r.gap_columns) ? (r.gap_columns as string[]) : [],
      periods: r.has_dates ? cohortPeriods(r.column_summary as Record<string, ColumnSummary> | null) : null,
      createdAt: iso(r.created_at)!,
    })),
  };
}

// ---------------------------------------------------------------- reproduce

/** The stored form of a finished computation: results exactly as jsonb will hold them, and their hash. */
export function sealResults(results: RunResults): { results: RunResults; resultsSha256: string } {
  const stored = asStored(results);
  return { results: stored, resultsSha256: resultsSha256(stored) };
}

function differences(
  a: unknown,
  b: unknown,
  path = '',
  out: ReproduceReport['differences'] = [],
  max = 25,
): NonNullable<ReproduceReport['differences']> {
  if (out!.length >= max) return out!;
  if (a === b) return out!;
  if (
    typeof a !== 'object' ||
    typeof b !== 'object' ||
    a === null ||
    b === null ||
    Array.isArray(a) !== Array.isArray(b)
  ) {
    out!.push({ path: path || '(root)', stored: a, recomputed: b });
    return out!;
  }
  const keys = new Set([...Object.keys(a as object), ...Object.keys(b as object)]);
  for (const k of keys)
    differences(
      (a as Record<string, unknown>)[k],
      (b as Record<string, unknown>)[k],
      Array.isArray(a) ? `${path}[${k}]` : path ? `${path}.${k}` : k,
      out,
      max,
    );
  return out!;
}

/** Re-computes a completed run from its stored inputs (in a worker thread) and compares the hash bit for bit. */
export async function reproduceRun(actor: AuthUser, id: string, ip: string | null = null): Promise<ReproduceReport> {
  const run = await dataSource.getRepository(ValidationRun).findOne({ where: { id } });
  if (!run) throw notFound('validation run');
  if (run.status !== 'completed' || !run.results || !run.resultsSha256)
    throw conflict(`only a completed run can be reproduced; this one is ${run.status}`);
  const outcome = await computeInThread({
    task: 'run',
    scoreVersionId: run.scoreVersionId,
    cohortVersionId: run.cohortVersionId,
    settings: run.settings,
  }).result;
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
  if (inputsHash !== run.inputsSha256)
    report.differences = [
      { path: '(inputs)', stored: run.inputsSha256, recomputed: inputsHash },
      ...(report.differences ?? []),
    ];
  await appendAudit({
    actorId: actor.id,
    actorEmail: actor.email,
    action: 'run.reproduced',
    targetType: 'validation_run',
    targetId: id,
    sourceIp: ip,
    details: {
      match,
      storedSha256: report.storedSha256,
      recomputedSha256: report.recomputedSha256,
      engineVersionNow: ENGINE_VERSION,
    },
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
  const [a, b] = await Promise.all([
    getRun(aId, dataSource.manager, { adequacy: false }),
    getRun(bId, dataSource.manager, { adequacy: false }),
  ]);
  if (a.status !== 'completed' || b.status !== 'completed' || !a.results || !b.results)
    throw conflict('both runs must be completed to compare them');
  const oa = a.results.overall;
  const ob = b.results.overall;
  const settingsDiffer = Object.keys({ ...a.settings, ...b.settings }).filter(
    (k) =>
      JSON.stringify((a.settings as Record<string, unknown>)[k]) !==
      JSON.stringify((b.settings as Record<string, unknown>)[k]),
  );
  const strip = ({
    results: _r,
    settings: _s,
    inputsSha256: _i,
    resultsSha256: _h,
    adequacy: _a,
    ...rest
  }: RunDetail): RunSummary => rest;
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
