// Demo drift rules (invented scenario): the default alert rules for the fictional Kestrel score, then an evaluation of
// its seeded versions so the demo's rising baseline risk shows as an alert (and its e-mail in email_outbox). Idempotent.
import { dataSource } from '../../platform/database/dataSource';
import { createAlertRule } from '../../domain/drift/alertRules';
import { evaluateAlertsForVersion } from '../../domain/drift/alerts';
import { KESTREL_SCORE_NAME } from './cohorts';
import { logger } from '../../platform/observability/log';

const DEFAULT_RULES = [
  { kind: 'citl-consecutive', params: { periods: 2 } },
  { kind: 'cusum', params: { oddsRatio: 2, h: 4.5 } },
  { kind: 'oe-limit', params: {} },
] as const;

export async function seedDrift(): Promise<void> {
  const scores: { id: string }[] = await dataSource.query('SELECT id FROM scores WHERE name = $1', [
    KESTREL_SCORE_NAME,
  ]);
  if (!scores.length) {
    logger.warn(`seedDrift: "${KESTREL_SCORE_NAME}" not found; drift rules skipped`);
    return;
  }
  const scoreId = scores[0].id;
  const [statistician]: { id: string; email: string }[] = await dataSource.query(
    `SELECT id, email FROM users WHERE email = 'statistician@demo.test'`,
  );
  let made = 0;
  for (const rule of DEFAULT_RULES) {
    const have = await dataSource.query('SELECT 1 FROM alert_rules WHERE score_id = $1 AND kind = $2 LIMIT 1', [
      scoreId,
      rule.kind,
    ]);
    if (have.length) continue;
    await createAlertRule(
      statistician ?? null,
      scoreId,
      { kind: rule.kind, params: { ...rule.params }, enabled: true },
      null,
    );
    made++;
  }
  const versions: { id: string; version: number }[] = await dataSource.query(
    `SELECT DISTINCT sv.id, sv.version FROM score_versions sv JOIN validation_runs r ON r.score_version_id = sv.id AND r.status = 'completed'
     WHERE sv.score_id = $1 ORDER BY sv.version`,
    [scoreId],
  );
  let alerts = 0;
  for (const v of versions) alerts += (await evaluateAlertsForVersion(v.id)).length;
  logger.info(
    `[seed] drift: ${made} alert rule${made === 1 ? '' : 's'} added, ${alerts} new alert${alerts === 1 ? '' : 's'} raised`,
  );
}
