// Drift monitoring of a score version across its completed runs: per-period figures, funnel limits, per-patient
// risk-adjusted CUSUM and cumulative O − E, merged from the stored drift series. Predicted risk per patient comes from
// runCompute.predictedRisk, the same path the runs use.
import type { EntityManager } from 'typeorm';
import type { DriftPeriod, DriftPoint, DriftResponse } from '@shared/drift';
import { formatPeriodRange, periodCovering, wholeMonths } from '@shared/periods';
import type { Estimate, FitResult } from '@shared/validation';
import { dataSource } from '../../platform/database/dataSource';
import { AlertRule } from '../../platform/database/entities/AlertRule';
import { notFound } from '../errors';
import { funnelLimits } from '../../stats/funnelLimits';
import { observedMinusExpected } from '../../stats/observedMinusExpected';
import { riskAdjustedCusum, type CusumResult } from '../../stats/riskAdjustedCusum';
import { mainQuery } from '../cohorts/cohortData';
import { readDriftSeries, type DriftSeriesPart } from './driftSeries';
import { computeInThread } from '../../jobs/threads/pool';
import type { RunScoreInput } from '../runs/runCompute';
import { convergedEstimate, finiteEstimate } from './recalibrationFit';
import { getScoreVersionByNumber } from '../scores/scores';
import { DEFAULT_CUSUM, DEFAULT_IMPROVEMENT_OR } from './alertRules';
import { listAlerts } from './alerts';

// ---------------------------------------------------------------- loading

interface RunRow {
  id: string;
  cohort_version_id: string;
  label: string;
  period_start: string | null;
  period_end: string | null;
  n: number;
  events: number;
  auc: Estimate | null;
  citl: FitResult<Estimate> | null;
  slope: FitResult<Estimate> | null;
  oe: (Estimate & { observed: number; expected: number }) | null;
  /** the statistician chose this run for the timeline (else it is the newest completed run of its cohort version) */
  chosen: boolean;
  /** 1 for the first run of the score version, in the order runs were started */
  run_number: number;
  /** completed runs of this score version on the same cohort version */
  runs_of_cohort: DriftPeriod['runsOfCohortVersion'];
}

export interface VersionRow {
  id: string;
  score_id: string;
  score_name: string;
  version: number;
  mode: 'formula' | 'supplied';
  model: RunScoreInput['model'];
  probability_column: string | null;
}

/** Patients of the distinct cohort versions, in event-date order, merged from their stored drift series. */
interface PatientSeries {
  p: Float64Array;
  y: Uint8Array;
  n: number;
  /** The event date and cohort version of the patient at a position (looked up in the merged date groups). */
  dateAt: (t: number) => string | null;
  cohortAt: (t: number) => string;
  /** per cohort version: Σp(1−p) (for the funnel limits). */
  variance: Map<string, number>;
}

const VERSION_SELECT = `SELECT sv.id, sv.score_id, s.name AS score_name, sv.version, sv.mode, sv.model, sv.probability_column
  FROM score_versions sv JOIN scores s ON s.id = sv.score_id`;

export async function versionById(id: string, m: EntityManager = dataSource.manager): Promise<VersionRow> {
  const rows: VersionRow[] = await m.query(`${VERSION_SELECT} WHERE sv.id = $1`, [id]);
  if (!rows[0]) throw notFound('score version');
  return rows[0];
}

/**
 * One completed run per cohort version — the one the statistician chose (drift_run_choices), else the newest — so a
 * re-run never counts the same patients twice; ordered by the cohort's period, then its label. Only the headline figures.
 */
async function completedRuns(versionId: string): Promise<RunRow[]> {
  return dataSource.query(
    `SELECT * FROM (
       SELECT DISTINCT ON (r.cohort_version_id)
              r.id, r.cohort_version_id, cv.label, to_char(cv.period_start, 'YYYY-MM-DD') AS period_start, to_char(cv.period_end, 'YYYY-MM-DD') AS period_end,
              (ov.o->>'n')::int AS n, (ov.o->>'events')::int AS events,
              ov.o->'auc' AS auc, ov.o->'calibrationIntercept' AS citl,
              ov.o->'calibrationSlope' AS slope, ov.o->'oe' AS oe,
              (ch.run_id = r.id) IS TRUE AS chosen,
              (SELECT count(*)::int FROM validation_runs x WHERE x.score_version_id = r.score_version_id AND (x.created_at, x.id) <= (r.created_at, r.id)) AS run_number,
              (SELECT json_agg(json_build_object('runId', x.id, 'finishedAt', x.finished_at,
                        'runNumber', (SELECT count(*) FROM validation_runs z WHERE z.score_version_id = x.score_version_id AND (z.created_at, z.id) <= (x.created_at, x.id)))
                      ORDER BY x.created_at, x.id)
               FROM validation_runs x WHERE x.score_version_id = r.score_version_id AND x.cohort_version_id = r.cohort_version_id AND x.status = 'completed') AS runs_of_cohort,
              r.finished_at
       FROM validation_runs r JOIN cohort_versions cv ON cv.id = r.cohort_version_id
       LEFT JOIN drift_run_choices ch ON ch.score_version_id = r.score_version_id AND ch.cohort_version_id = r.cohort_version_id
       -- results is a large TOASTed jsonb: 'overall' is de-compressed once per run, not once per field (OFFSET 0 keeps
       -- the planner from folding the sub-select back into the select list).
       LEFT JOIN LATERAL (SELECT r.results->'overall' AS o OFFSET 0) ov ON true
       WHERE r.score_version_id = $1 AND r.status = 'completed'
       ORDER BY r.cohort_version_id, (ch.run_id = r.id) IS TRUE DESC, r.finished_at DESC, r.id DESC
     ) one
     ORDER BY period_start NULLS LAST, period_end NULLS LAST, label, finished_at`,
    [versionId],
  );
}

export const scoreInputOf = (v: VersionRow): RunScoreInput => ({
  mode: v.mode,
  model: v.model,
  probabilityColumn: v.probability_column,
});

/** Stored series of the version on these cohort versions; a pair without one (a run stored before series were kept) gets it worked out in the run thread first. */
async function storedSeries(versionId: string, cohortVersionIds: string[]): Promise<Map<string, DriftSeriesPart>> {
  const found = await readDriftSeries(mainQuery, versionId, cohortVersionIds);
  const missing = cohortVersionIds.filter((id) => !found.has(id));
  if (!missing.length) return found;
  for (const cohortVersionId of missing)
    await computeInThread({ task: 'drift-series', scoreVersionId: versionId, cohortVersionId }).result;
  return readDriftSeries(mainQuery, versionId, cohortVersionIds);
}

/**
 * Merges the stored series in event-date order: each series is already in date order, so only its date groups are
 * ordered (undated last; ties keep the period order, then each cohort's line order) and their slices copied.
 */
async function patientSeries(version: VersionRow, runs: RunRow[]): Promise<PatientSeries> {
  const cohortVersionIds = [...new Set(runs.map((r) => r.cohort_version_id))];
  const stored = await storedSeries(version.id, cohortVersionIds);
  const parts = cohortVersionIds.map((id) => stored.get(id)!);
  const groups: { date: string | null; c: number; from: number; count: number }[] = [];
  parts.forEach((part, c) => {
    let from = 0;
    part.dates.forEach((date, k) => {
      groups.push({ date, c, from, count: part.counts[k] });
      from += part.counts[k];
    });
  });
  const key = (d: string | null) => d ?? '\uffff';
  groups.sort((a, b) => (key(a.date) < key(b.date) ? -1 : key(a.date) > key(b.date) ? 1 : a.c - b.c));
  const n = parts.reduce((s, x) => s + x.n, 0);
  const p = new Float64Array(n);
  const y = new Uint8Array(n);
  const starts = new Int32Array(groups.length);
  let at = 0;
  groups.forEach((g, k) => {
    starts[k] = at;
    p.set(parts[g.c].p.subarray(g.from, g.from + g.count), at);
    y.set(parts[g.c].y.subarray(g.from, g.from + g.count), at);
    at += g.count;
  });
  const groupAt = (t: number) => {
    let lo = 0;
    let hi = groups.length - 1;
    while (lo < hi) {
      const mid = (lo + hi + 1) >> 1;
      if (starts[mid] <= t) lo = mid;
      else hi = mid - 1;
    }
    return groups[lo];
  };
  const variance = new Map(cohortVersionIds.map((id, c) => [id, parts[c].variance]));
  return { p, y, n, variance, dateAt: (t) => groupAt(t).date, cohortAt: (t) => cohortVersionIds[groupAt(t).c] };
}

// ---------------------------------------------------------------- the drift view

/** What a cohort version's dates cover: 2026-Q2, 2026-H1 (half-year), or a span of months, so unequal periods show as such. */
function periodSpan(start: string | null, end: string | null): DriftPeriod['period'] {
  const one = periodCovering(start, end);
  return {
    label: one ? one.label : start || end ? formatPeriodRange(start, end) : 'period not recorded',
    kind: one?.kind ?? null,
    months: wholeMonths(start, end),
  };
}

export interface DriftCore {
  version: VersionRow;
  runs: RunRow[];
  periods: DriftPeriod[];
  series: PatientSeries;
}

export async function driftCore(versionId: string): Promise<DriftCore> {
  const version = await versionById(versionId);
  const runs = await completedRuns(versionId);
  const series = await patientSeries(version, runs);
  const periods: DriftPeriod[] = runs.map((r) => {
    // O and E as the run stored them; the variance Σp(1−p) from the stored drift series.
    const observed = r.oe?.observed ?? 0;
    const expected = r.oe?.expected ?? 0;
    const variance = series.variance.get(r.cohort_version_id) ?? 0;
    const lim = funnelLimits(observed, expected, variance);
    return {
      runId: r.id,
      runNumber: r.run_number,
      cohortVersionId: r.cohort_version_id,
      runChoice: r.chosen ? 'chosen' : 'newest',
      otherRuns: Math.max(0, r.runs_of_cohort.length - 1),
      runsOfCohortVersion: r.runs_of_cohort,
      label: r.label || r.period_start || r.id.slice(0, 8),
      periodStart: r.period_start,
      periodEnd: r.period_end,
      period: periodSpan(r.period_start, r.period_end),
      n: r.n,
      events: r.events,
      observed,
      expected,
      auc: finiteEstimate(r.auc),
      calibrationIntercept: convergedEstimate(r.citl),
      calibrationSlope: convergedEstimate(r.slope),
      oe: finiteEstimate(r.oe),
      funnel: {
        oMinusE: lim.oMinusE,
        lower95: lim.limits95.oMinusE[0],
        upper95: lim.limits95.oMinusE[1],
        lower998: lim.limits998.oMinusE[0],
        upper998: lim.limits998.oMinusE[1],
        status: lim.status,
      },
    };
  });
  return { version, runs, periods, series };
}

export function cusumOf(series: PatientSeries, oddsRatio: number, h: number): CusumResult {
  return riskAdjustedCusum(series.p, series.y, { oddsRatio, h });
}

const pointsOf = (series: PatientSeries, pts: { index: number; value: number }[]): DriftPoint[] =>
  pts.map((q) => ({ index: q.index, date: series.dateAt(q.index), value: q.value }));

async function cusumParams(scoreId: string): Promise<{ oddsRatio: number; h: number }> {
  const rule = await dataSource.getRepository(AlertRule).findOne({
    select: { id: true, params: true },
    where: { scoreId, kind: 'cusum', enabled: true },
    order: { createdAt: 'ASC' },
  });
  return ruleCusum(rule?.params ?? {});
}

export function ruleCusum(params: Record<string, unknown>): { oddsRatio: number; h: number } {
  const or = Number(params.oddsRatio);
  const h = Number(params.h);
  return { oddsRatio: or > 0 && or !== 1 ? or : DEFAULT_CUSUM.oddsRatio, h: h > 0 ? h : DEFAULT_CUSUM.h };
}

export async function driftForVersion(scoreId: string, versionNumber: number): Promise<DriftResponse> {
  const sv = await getScoreVersionByNumber(scoreId, versionNumber);
  const core = await driftCore(sv.id);
  const { series, periods, version } = core;
  const { oddsRatio, h } = await cusumParams(scoreId);
  const up = cusumOf(series, oddsRatio, h);
  const down = cusumOf(series, DEFAULT_IMPROVEMENT_OR, h);
  const oe = observedMinusExpected(series.p, series.y);
  const ref = periods[0];
  return {
    scoreId,
    scoreName: version.score_name,
    version: version.version,
    versionId: version.id,
    reference: ref
      ? {
          runId: ref.runId,
          label: ref.label,
          auc: ref.auc,
          calibrationIntercept: ref.calibrationIntercept,
          calibrationSlope: ref.calibrationSlope,
          oe: ref.oe,
        }
      : null,
    periods,
    cusum: {
      oddsRatio,
      h,
      points: pointsOf(series, up.series),
      signals: up.signals.map((s) => ({ index: s.index, date: series.dateAt(s.index) })),
      improvement: {
        oddsRatio: DEFAULT_IMPROVEMENT_OR,
        points: pointsOf(series, down.series),
        signals: down.signals.map((s) => ({ index: s.index, date: series.dateAt(s.index) })),
      },
    },
    observedMinusExpected: { points: pointsOf(series, oe.series) },
    alerts: await listAlerts({ versionId: version.id }),
  };
}
