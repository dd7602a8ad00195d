// Drift alerts: raised when a rule fires on a score version's timeline (after each completed run), listed, and
// acknowledged one at a time or several together (one note, all or none, one audit entry per alert).
import { formatCount, formatEstimate, formatFigure } from '@shared/format';
import { In, type EntityManager } from 'typeorm';
import type { AlertRuleKind, AlertView, DriftPeriod } from '@shared/drift';
import type { Estimate } from '@shared/validation';
import { dataSource } from '../../platform/database/dataSource';
import { AlertRule } from '../../platform/database/entities/AlertRule';
import { DriftAlert } from '../../platform/database/entities/DriftAlert';
import { ValidationRun } from '../../platform/database/entities/ValidationRun';
import type { AuthUser } from '../accounts/actor';
import { conflict, notFound } from '../errors';
import { appendAudit } from '../accounts/audit';
import { queueEmail, recipientsForRole } from '../notifications/mail';
import { DEFAULT_AUC_THRESHOLD, DEFAULT_CITL_PERIODS } from './alertRules';
import { cusumOf, driftCore, ruleCusum, versionById, type DriftCore } from './timeline';

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

export async function listAlerts(
  filter: { versionId?: string; scoreId?: string } = {},
  m: EntityManager = dataSource.manager,
): Promise<AlertView[]> {
  const rows: AlertRow[] = filter.versionId
    ? await m.query(`${ALERT_SELECT} WHERE a.score_version_id = $1 ORDER BY a.raised_at DESC, a.period`, [
        filter.versionId,
      ])
    : await m.query(
        `${ALERT_SELECT} WHERE ($1::uuid IS NULL OR s.id = $1) ORDER BY (a.acknowledged_at IS NULL) DESC, a.raised_at DESC LIMIT 500`,
        [filter.scoreId ?? null],
      );
  return rows.map(toAlertView);
}

export async function acknowledgeAlert(
  actor: AuthUser,
  id: string,
  note: string,
  ip: string | null,
): Promise<AlertView> {
  return dataSource.transaction(async (m) => {
    const found = await m
      .getRepository(DriftAlert)
      .findOne({ select: { id: true, acknowledgedAt: true }, where: { id }, lock: { mode: 'pessimistic_write' } });
    if (!found) throw notFound('alert');
    if (found.acknowledgedAt) throw conflict('this alert has already been acknowledged');
    await m
      .getRepository(DriftAlert)
      .update(id, { acknowledgedBy: actor.id, acknowledgedAt: () => 'now()', ackNote: note });
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'drift_alert.acknowledged',
        targetType: 'drift_alert',
        targetId: id,
        sourceIp: ip,
        details: { note },
      },
      m,
    );
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
        detail: {
          periods: run.map((q) => ({ label: q.label, runId: q.runId, calibrationIntercept: q.calibrationIntercept })),
          consecutive: k,
        },
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
  const rules = await dataSource.getRepository(AlertRule).find({
    select: { id: true, kind: true, params: true },
    where: { scoreId: version.score_id, enabled: true },
    order: { createdAt: 'ASC', id: 'ASC' },
  });
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
      // The unique (score version, rule, period) key makes a second raise of the same alert insert nothing.
      const { raw: ins }: { raw: { id: string }[] } = await m
        .createQueryBuilder()
        .insert()
        .into(DriftAlert)
        .values({ scoreVersionId: versionId, ruleId: rule.id, period, detail: { ...f.detail, message: f.message } })
        .orIgnore()
        .updateEntity(false)
        .returning('id')
        .execute();
      if (!ins[0]) continue;
      ids.push(ins[0].id);
      lines.push(`- ${period} (${rule.kind}): ${f.message}`);
      await appendAudit(
        {
          action: 'drift_alert.raised',
          targetType: 'drift_alert',
          targetId: ins[0].id,
          details: { scoreVersionId: versionId, ruleId: rule.id, kind: rule.kind, period },
        },
        m,
      );
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
  const rows: AlertRow[] = await dataSource.query(`${ALERT_SELECT} WHERE a.id = ANY($1::uuid[]) ORDER BY a.period`, [
    raised,
  ]);
  return rows.map(toAlertView);
}

export async function evaluateAlertsForRun(runId: string): Promise<AlertView[]> {
  const run = await dataSource
    .getRepository(ValidationRun)
    .findOne({ select: { id: true, scoreVersionId: true, status: true }, where: { id: runId } });
  if (!run || run.status !== 'completed') return [];
  return evaluateAlertsForVersion(run.scoreVersionId);
}

export async function acknowledgeAlerts(
  actor: AuthUser,
  ids: string[],
  note: string,
  ip: string | null,
): Promise<AlertView[]> {
  const unique = [...new Set(ids)];
  return dataSource.transaction(async (m) => {
    // Locked in id order, so two bulk acknowledgements that overlap wait for each other rather than deadlock.
    const found = await m.getRepository(DriftAlert).find({
      select: { id: true, acknowledgedAt: true },
      where: { id: In(unique) },
      order: { id: 'ASC' },
      lock: { mode: 'pessimistic_write' },
    });
    if (found.length !== unique.length) throw notFound(`${unique.length - found.length} of the alerts`);
    const done = found.filter((f) => f.acknowledgedAt);
    if (done.length)
      throw conflict(
        `${done.length} of the chosen alerts ${done.length === 1 ? 'has' : 'have'} already been acknowledged; reload the list and choose again`,
      );
    await m
      .getRepository(DriftAlert)
      .update({ id: In(unique) }, { acknowledgedBy: actor.id, acknowledgedAt: () => 'now()', ackNote: note });
    for (const id of unique) {
      await appendAudit(
        {
          actorId: actor.id,
          actorEmail: actor.email,
          action: 'drift_alert.acknowledged',
          targetType: 'drift_alert',
          targetId: id,
          sourceIp: ip,
          details: { note, together: unique.length },
        },
        m,
      );
    }
    const rows: AlertRow[] = await m.query(`${ALERT_SELECT} WHERE a.id = ANY($1::uuid[]) ORDER BY a.raised_at DESC`, [
      unique,
    ]);
    return rows.map(toAlertView);
  });
}
