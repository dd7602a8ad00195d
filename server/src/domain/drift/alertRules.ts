// The alert rules that watch a score's drift, and each kind's defaults where a parameter is left out.
import type { EntityManager } from 'typeorm';
import type { AlertRuleBody, AlertRuleKind, AlertRuleView } from '@shared/drift';
import { dataSource } from '../../platform/database/dataSource';
import { AlertRule } from '../../platform/database/entities/AlertRule';
import { Score } from '../../platform/database/entities/Score';
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
  if (!(await m.getRepository(Score).exists({ where: { id: scoreId } }))) throw notFound('score');
}

export async function listAlertRules(scoreId: string): Promise<AlertRuleView[]> {
  await scoreExists(scoreId);
  const rows = await dataSource.getRepository(AlertRule).find({
    select: { id: true, kind: true, params: true, enabled: true },
    where: { scoreId },
    order: { createdAt: 'ASC', id: 'ASC' },
  });
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
    const rule = m.getRepository(AlertRule).create({
      scoreId,
      kind: body.kind,
      params: body.params ?? {},
      enabled: body.enabled ?? true,
      createdBy: actor?.id ?? null,
    });
    await m.getRepository(AlertRule).save(rule);
    await appendAudit(
      {
        actorId: actor?.id ?? null,
        actorEmail: actor?.email,
        action: 'alert_rule.created',
        targetType: 'alert_rule',
        targetId: rule.id,
        sourceIp: ip,
        details: { scoreId, kind: body.kind, params: body.params ?? {}, enabled: body.enabled ?? true },
      },
      m,
    );
    return toRuleView(rule);
  });
}
