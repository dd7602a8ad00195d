// Drift monitoring of a score version across its completed runs (per-period figures, funnel limits, per-patient
// risk-adjusted CUSUM and cumulative O − E), the alert rules that watch it, and recalibration into a draft version.
// Predicted risk per patient comes from runCompute.predictedRisk, the same path the runs use.
import type { EntityManager } from 'typeorm';
import type { AlertRuleBody, AlertRuleKind, AlertRuleView, AlertView, CalibrationPoint, CalibrationSummary, Derivation, DriftPeriod, DriftPoint, DriftResponse, RecalibrationMethod } from '@shared/drift';
import { RECALIBRATION_BANNER } from '@shared/drift';
import { formatCount, formatEstimate, formatFigure } from '@shared/format';
import { formatPeriodRange, periodCovering, wholeMonths } from '@shared/periods';
import type { Estimate, FitResult } from '@shared/validation';
import { dataSource } from '../db/dataSource';
import type { AuthUser } from '../middleware/auth';
import { conflict, notFound } from '../middleware/errors';
import { funnelLimits } from '../stats/funnelLimits';
import { observedMinusExpected } from '../stats/observedMinusExpected';
import { transformModel } from '../stats/recalibration';
import { riskAdjustedCusum, type CusumResult } from '../stats/riskAdjustedCusum';
import { appendAudit } from './audit';
import { mainQuery } from './cohortData';
import { readDriftSeries, type DriftSeriesPart } from './driftSeries';
import { computeInThread, recalibrateInPool } from '../workers/pool';
import { queueEmail, recipientsForRole } from './mail';
import type { RunScoreInput } from './runCompute';
import { fitted, plain } from './recalibrationFit';
import { createScoreVersion, getScoreVersionByNumber, scoreVersionDto } from './scores';
import { logger } from '../observability/log';

export const DEFAULT_CUSUM = { oddsRatio: 2, h: 4.5 };
export const DEFAULT_IMPROVEMENT_OR = 0.5;
export const DEFAULT_AUC_THRESHOLD = 0.7;
export const DEFAULT_CITL_PERIODS = 2;

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

interface VersionRow {
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

async function versionById(id: string, m: EntityManager = dataSource.manager): Promise<VersionRow> {
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

const scoreInputOf = (v: VersionRow): RunScoreInput => ({ mode: v.mode, model: v.model, probabilityColumn: v.probability_column });

/** Stored series of the version on these cohort versions; a pair without one (a run stored before series were kept) gets it worked out in the run thread first. */
async function storedSeries(versionId: string, cohortVersionIds: string[]): Promise<Map<string, DriftSeriesPart>> {
  const found = await readDriftSeries(mainQuery, versionId, cohortVersionIds);
  const missing = cohortVersionIds.filter((id) => !found.has(id));
  if (!missing.length) return found;
  for (const cohortVersionId of missing) await computeInThread({ task: 'drift-series', scoreVersionId: versionId, cohortVersionId }).result;
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
  return { label: one ? one.label : start || end ? formatPeriodRange(start, end) : 'period not recorded', kind: one?.kind ?? null, months: wholeMonths(start, end) };
}

interface DriftCore {
  version: VersionRow;
  runs: RunRow[];
  periods: DriftPeriod[];
  series: PatientSeries;
}

async function driftCore(versionId: string): Promise<DriftCore> {
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
      auc: plain(r.auc),
      calibrationIntercept: fitted(r.citl),
      calibrationSlope: fitted(r.slope),
      oe: plain(r.oe),
      funnel: { oMinusE: lim.oMinusE, lower95: lim.limits95.oMinusE[0], upper95: lim.limits95.oMinusE[1], lower998: lim.limits998.oMinusE[0], upper998: lim.limits998.oMinusE[1], status: lim.status },
    };
  });
  return { version, runs, periods, series };
}

function cusumOf(series: PatientSeries, oddsRatio: number, h: number): CusumResult {
  return riskAdjustedCusum(series.p, series.y, { oddsRatio, h });
}

const pointsOf = (series: PatientSeries, pts: { index: number; value: number }[]): DriftPoint[] =>
  pts.map((q) => ({ index: q.index, date: series.dateAt(q.index), value: q.value }));

async function cusumParams(scoreId: string): Promise<{ oddsRatio: number; h: number }> {
  const rows: { params: Record<string, unknown> }[] = await dataSource.query(
    `SELECT params FROM alert_rules WHERE score_id = $1 AND kind = 'cusum' AND enabled ORDER BY created_at LIMIT 1`,
    [scoreId],
  );
  return ruleCusum(rows[0]?.params ?? {});
}

function ruleCusum(params: Record<string, unknown>): { oddsRatio: number; h: number } {
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
    reference: ref ? { runId: ref.runId, label: ref.label, auc: ref.auc, calibrationIntercept: ref.calibrationIntercept, calibrationSlope: ref.calibrationSlope, oe: ref.oe } : null,
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

// ---------------------------------------------------------------- alerts

export interface AlertRow {
  id: string;
  score_id: string;
  score_name: string;
  score_version_id: string;
  version: number;
  kind: AlertRuleKind;
  period: string;
  detail: Record<string, unknown>;
  raised_at: Date;
  acknowledged_by: string | null;
  acknowledged_at: Date | null;
  ack_note: string | null;
}

export const ALERT_SELECT = `SELECT a.id, s.id AS score_id, s.name AS score_name, a.score_version_id, sv.version, ar.kind, a.period, a.detail, a.raised_at,
    coalesce(u.name, u.email) AS acknowledged_by, a.acknowledged_at, a.ack_note
  FROM drift_alerts a JOIN alert_rules ar ON ar.id = a.rule_id JOIN score_versions sv ON sv.id = a.score_version_id
  JOIN scores s ON s.id = sv.score_id LEFT JOIN users u ON u.id = a.acknowledged_by`;

export function toAlertView(r: AlertRow): AlertView {
  return {
    id: r.id,
    scoreId: r.score_id,
    scoreName: r.score_name,
    scoreVersionId: r.score_version_id,
    version: r.version,
    ruleKind: r.kind,
    period: r.period,
    message: typeof r.detail?.message === 'string' ? r.detail.message : `${r.kind} in ${r.period}`,
    detail: r.detail ?? {},
    raisedAt: new Date(r.raised_at).toISOString(),
    acknowledgedBy: r.acknowledged_by,
    acknowledgedAt: r.acknowledged_at ? new Date(r.acknowledged_at).toISOString() : null,
    ackNote: r.ack_note,
  };
}

export async function listAlerts(filter: { versionId?: string; scoreId?: string } = {}, m: EntityManager = dataSource.manager): Promise<AlertView[]> {
  const rows: AlertRow[] = filter.versionId
    ? await m.query(`${ALERT_SELECT} WHERE a.score_version_id = $1 ORDER BY a.raised_at DESC, a.period`, [filter.versionId])
    : await m.query(`${ALERT_SELECT} WHERE ($1::uuid IS NULL OR s.id = $1) ORDER BY (a.acknowledged_at IS NULL) DESC, a.raised_at DESC LIMIT 500`, [filter.scoreId ?? null]);
  return rows.map(toAlertView);
}

export async function acknowledgeAlert(actor: AuthUser, id: string, note: string, ip: string | null): Promise<AlertView> {
  return dataSource.transaction(async (m) => {
    const found: { acknowledged_at: Date | null }[] = await m.query('SELECT acknowledged_at FROM drift_alerts WHERE id = $1 FOR UPDATE', [id]);
    if (!found[0]) throw notFound('alert');
    if (found[0].acknowledged_at) throw conflict('this alert has already been acknowledged');
    await m.query('UPDATE drift_alerts SET acknowledged_by = $2, acknowledged_at = now(), ack_note = $3 WHERE id = $1', [id, actor.id, note]);
    await appendAudit({ actorId: actor.id, actorEmail: actor.email, action: 'drift_alert.acknowledged', targetType: 'drift_alert', targetId: id, sourceIp: ip, details: { note } }, m);
    const rows: AlertRow[] = await m.query(`${ALERT_SELECT} WHERE a.id = $1`, [id]);
    return toAlertView(rows[0]);
  });
}

interface Firing {
  period: string;
  message: string;
  detail: Record<string, unknown>;
}

const excludesZero = (e: Estimate | null) => !!e && (e.lower > 0 || e.upper < 0);

function fire(rule: { kind: AlertRuleKind; params: Record<string, unknown> }, core: DriftCore): Firing[] {
  const { periods, series } = core;
  const out: Firing[] = [];
  if (rule.kind === 'citl-consecutive') {
    const k = Math.max(1, Math.floor(Number(rule.params.periods) || DEFAULT_CITL_PERIODS));
    for (let i = k - 1; i < periods.length; i++) {
      const run = periods.slice(i - k + 1, i + 1);
      if (!run.every((q) => excludesZero(q.calibrationIntercept))) continue;
      const c = periods[i].calibrationIntercept!;
      out.push({
        period: periods[i].label,
        message: `Calibration-in-the-large differs from 0 for ${k} consecutive periods up to ${periods[i].label} (CITL ${formatEstimate('calibrationIntercept', c)}).`,
        detail: { periods: run.map((q) => ({ label: q.label, runId: q.runId, calibrationIntercept: q.calibrationIntercept })), consecutive: k },
      });
    }
  } else if (rule.kind === 'cusum') {
    const { oddsRatio, h } = ruleCusum(rule.params);
    const res = cusumOf(series, oddsRatio, h);
    // Each signal belongs to the period (run) of the cohort version its patient came from.
    const labelOf = new Map<string, DriftPeriod>();
    core.runs.forEach((r, i) => {
      if (!labelOf.has(r.cohort_version_id)) labelOf.set(r.cohort_version_id, periods[i]);
    });
    const byPeriod = new Map<string, { period: DriftPeriod; signals: { index: number; date: string | null }[] }>();
    for (const s of res.signals) {
      const period = labelOf.get(series.cohortAt(s.index))!;
      const entry = byPeriod.get(period.label) ?? { period, signals: [] };
      entry.signals.push({ index: s.index, date: series.dateAt(s.index) });
      byPeriod.set(period.label, entry);
    }
    for (const [label, e] of byPeriod)
      out.push({
        period: label,
        message: `Risk-adjusted CUSUM (odds ratio ${oddsRatio}, h ${h}) signalled ${e.signals.length} time${e.signals.length === 1 ? '' : 's'} in ${label}, first on ${e.signals[0].date ?? 'an undated patient'}.`,
        detail: { oddsRatio, h, runId: e.period.runId, signals: e.signals.slice(0, 50), count: e.signals.length },
      });
  } else if (rule.kind === 'oe-limit') {
    for (const q of periods)
      if (q.funnel.status === 'outside')
        out.push({
          period: q.label,
          message: `Observed − expected events in ${q.label} is ${formatFigure('expected', q.funnel.oMinusE)} (O ${formatCount(q.observed)}, E ${formatFigure('expected', q.expected)}), outside the 99.8% limits ±${formatFigure('expected', q.funnel.upper998)}.`,
          detail: { runId: q.runId, observed: q.observed, expected: q.expected, funnel: q.funnel },
        });
  } else if (rule.kind === 'auc-below') {
    const threshold = Number(rule.params.threshold) > 0 ? Number(rule.params.threshold) : DEFAULT_AUC_THRESHOLD;
    for (const q of periods)
      if (q.auc && q.auc.upper < threshold)
        out.push({
          period: q.label,
          message: `AUC in ${q.label} is ${formatEstimate('auc', q.auc)}, wholly below ${threshold}.`,
          detail: { runId: q.runId, auc: q.auc, threshold },
        });
  }
  return out;
}

/** Evaluates the score's enabled rules on a version; each (rule, period) raises an alert once. Returns the new alerts. */
export async function evaluateAlertsForVersion(versionId: string): Promise<AlertView[]> {
  const version = await versionById(versionId);
  const rules: { id: string; kind: AlertRuleKind; params: Record<string, unknown> }[] = await dataSource.query(
    'SELECT id, kind, params FROM alert_rules WHERE score_id = $1 AND enabled ORDER BY created_at, id',
    [version.score_id],
  );
  if (!rules.length) return [];
  const core = await driftCore(versionId);
  if (!core.periods.length) return [];
  const firings = rules.flatMap((rule) => fire(rule, core).map((f) => ({ rule, f, period: f.period.slice(0, 40) })));
  if (!firings.length) return [];
  // New alerts and one e-mail listing them commit together; an alert already on the record is not raised again.
  const raised: string[] = await dataSource.transaction(async (m) => {
    const ids: string[] = [];
    const lines: string[] = [];
    for (const { rule, f, period } of firings) {
      const ins: { id: string }[] = await m.query(
        `INSERT INTO drift_alerts (score_version_id, rule_id, period, detail) VALUES ($1, $2, $3, $4::jsonb)
         ON CONFLICT (score_version_id, rule_id, period) DO NOTHING RETURNING id`,
        [versionId, rule.id, period, JSON.stringify({ ...f.detail, message: f.message })],
      );
      if (!ins[0]) continue;
      ids.push(ins[0].id);
      lines.push(`- ${period} (${rule.kind}): ${f.message}`);
      await appendAudit({ action: 'drift_alert.raised', targetType: 'drift_alert', targetId: ins[0].id, details: { scoreVersionId: versionId, ruleId: rule.id, kind: rule.kind, period } }, m);
    }
    if (ids.length)
      await queueEmail(
        {
          to: await recipientsForRole('statistician', m),
          subject: `Plumbline drift alert${ids.length === 1 ? '' : 's'}: ${version.score_name} v${version.version} (${ids.length} new)`,
          text: `Drift rules fired for ${version.score_name}, version ${version.version}:\n\n${lines.join('\n')}\n\nOpen the score's drift timeline in Plumbline to review and acknowledge each alert.`,
          kind: 'drift-alert',
        },
        m,
      );
    return ids;
  });
  if (!raised.length) return [];
  const rows: AlertRow[] = await dataSource.query(`${ALERT_SELECT} WHERE a.id = ANY($1::uuid[]) ORDER BY a.period`, [raised]);
  return rows.map(toAlertView);
}

export async function evaluateAlertsForRun(runId: string): Promise<AlertView[]> {
  const rows: { score_version_id: string; status: string }[] = await dataSource.query('SELECT score_version_id, status FROM validation_runs WHERE id = $1', [runId]);
  if (!rows[0] || rows[0].status !== 'completed') return [];
  return evaluateAlertsForVersion(rows[0].score_version_id);
}

// ---------------------------------------------------------------- alert rules

const toRuleView = (r: { id: string; kind: AlertRuleKind; params: Record<string, unknown>; enabled: boolean }): AlertRuleView => ({
  id: r.id,
  kind: r.kind,
  params: r.params ?? {},
  enabled: r.enabled,
});

async function scoreExists(scoreId: string, m: EntityManager = dataSource.manager): Promise<void> {
  const rows: unknown[] = await m.query('SELECT 1 FROM scores WHERE id = $1', [scoreId]);
  if (!rows.length) throw notFound('score');
}

export async function listAlertRules(scoreId: string): Promise<AlertRuleView[]> {
  await scoreExists(scoreId);
  const rows = await dataSource.query('SELECT id, kind, params, enabled FROM alert_rules WHERE score_id = $1 ORDER BY created_at, id', [scoreId]);
  return rows.map(toRuleView);
}

export async function createAlertRule(actor: Pick<AuthUser, 'id' | 'email'> | null, scoreId: string, body: AlertRuleBody, ip: string | null): Promise<AlertRuleView> {
  return dataSource.transaction(async (m) => {
    await scoreExists(scoreId, m);
    const rows = await m.query('INSERT INTO alert_rules (score_id, kind, params, enabled, created_by) VALUES ($1, $2, $3::jsonb, $4, $5) RETURNING id, kind, params, enabled', [
      scoreId,
      body.kind,
      JSON.stringify(body.params ?? {}),
      body.enabled ?? true,
      actor?.id ?? null,
    ]);
    await appendAudit({ actorId: actor?.id ?? null, actorEmail: actor?.email, action: 'alert_rule.created', targetType: 'alert_rule', targetId: rows[0].id, sourceIp: ip, details: { scoreId, kind: body.kind, params: body.params ?? {}, enabled: body.enabled ?? true } }, m);
    return toRuleView(rows[0]);
  });
}

// ---------------------------------------------------------------- recalibration

/** Checks the run and its version here; the cohort is loaded and the fit made in a pool thread (workers/pool.ts). */
async function recalibrationFit(runId: string, method: RecalibrationMethod) {
  const rows: { id: string; status: string; score_version_id: string; cohort_version_id: string }[] = await dataSource.query(
    'SELECT id, status, score_version_id, cohort_version_id FROM validation_runs WHERE id = $1',
    [runId],
  );
  if (!rows[0]) throw notFound('validation run');
  if (rows[0].status !== 'completed') throw conflict(`the run is ${rows[0].status}; only a completed run can be recalibrated`);
  const version = await versionById(rows[0].score_version_id);
  if (version.mode !== 'formula' || !version.model)
    throw conflict('this score version uses supplied probabilities and has no formula to transform; recalibration needs a formula version');
  const answer = await recalibrateInPool({ cohortVersionId: rows[0].cohort_version_id, score: scoreInputOf(version), method });
  if (!answer.ok) throw conflict(answer.message);
  return { version, derivation: answer.derivation, fit: answer.fit };
}

export async function recalibrationPreview(runId: string, method: RecalibrationMethod): Promise<Derivation> {
  return (await recalibrationFit(runId, method)).derivation;
}

export async function recalibrate(actor: AuthUser, runId: string, method: RecalibrationMethod, ip: string) {
  const input = await recalibrationFit(runId, method);
  const { derivation, fit } = input;
  if (!fit) throw conflict('closed testing keeps the original score (no update is significant); no new version was proposed');
  const model = transformModel(input.version.model!, fit.a.estimate, fit.b.estimate);
  const sv = await createScoreVersion(
    actor,
    input.version.score_id,
    { mode: 'formula', model, changeNote: `Recalibrated (${method}) from run ${runId}`, derivedFromRunId: runId, derivation: derivation as unknown as Record<string, unknown> },
    ip,
  );
  await appendAudit({
    actorId: actor.id,
    actorEmail: actor.email,
    action: 'score_version.recalibrated',
    targetType: 'score_version',
    targetId: sv.id,
    sourceIp: ip,
    details: { fromRunId: runId, fromScoreVersionId: input.version.id, method, chosen: derivation.chosen, a: fit.a.estimate, b: fit.b.estimate },
  });
  return { version: await scoreVersionDto(sv), derivation, banner: RECALIBRATION_BANNER };
}
