// The alert rules that watch a score's drift, and each kind's defaults where a parameter is left out.
import type { EntityManager } from 'typeorm';
import type { AlertRuleBody, AlertRuleKind, AlertRuleView } from '@shared/drift';
import { dataSource } from '../../platform/database/dataSource';
import type { AuthUser } from '../accounts/actor';
import { notFound } from '../errors';
import { appendAudit } from '../accounts/audit';

export const DEFAULT_CUSUM = { oddsRatio: 2, h: 4.5 };
export const DEFAULT_IMPROVEMENT_OR = 0.5;
export const DEFAULT_AUC_THRESHOLD = 0.7;
export const DEFAULT_CITL_PERIODS = 2;

// ---------------------------------------------------------------- alert rules

const toRuleView = (r: {
  id: string;
  kind: AlertRuleKind;
  params: Record<string, unknown>;
  enabled: boolean;
}): AlertRuleView => ({
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
  const rows = await dataSource.query(
    'SELECT id, kind, params, enabled FROM alert_rules WHERE score_id = $1 ORDER BY created_at, id',
    [scoreId],
  );
  return rows.map(toRuleView);
}

export async function createAlertRule(
  actor: Pick<AuthUser, 'id' | 'email'> | null,
  scoreId: string,
  body: AlertRuleBody,
  ip: string | null,
): Promise<AlertRuleView> {
  return dataSource.transaction(async (m) => {
    await scoreExists(scoreId, m);
    const rows = await m.query(
      'INSERT INTO alert_rules (score_id, kind, params, enabled, created_by) VALUES ($1, $2, $3::jsonb, $4, $5) RETURNING id, kind, params, enabled',
      [scoreId, body.kind, JSON.stringify(body.params ?? {}), body.enabled ?? true, actor?.id ?? null],
    );
    await appendAudit(
      {
        actorId: actor?.id ?? null,
        actorEmail: actor?.email,
        action: 'alert_rule.created',
        targetType: 'alert_rule',
        targetId: rows[0].id,
        sourceIp: ip,
        details: { scoreId, kind: body.kind, params: body.params ?? {}, enabled: body.enabled ?? true },
      },
      m,
    );
    return toRuleView(rows[0]);
  });
}
