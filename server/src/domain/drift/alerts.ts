// Drift alerts acknowledged together: one note for several open alerts, all or none, one audit entry per alert.
import type { AlertView } from '@shared/drift';
import { dataSource } from '../../platform/database/dataSource';
import type { AuthUser } from '../accounts/actor';
import { conflict, notFound } from '../errors';
import { appendAudit } from '../accounts/audit';
import { ALERT_SELECT, toAlertView, type AlertRow } from './drift';

export async function acknowledgeAlerts(actor: AuthUser, ids: string[], note: string, ip: string | null): Promise<AlertView[]> {
  const unique = [...new Set(ids)];
  return dataSource.transaction(async (m) => {
    // Locked in id order, so two bulk acknowledgements that overlap wait for each other rather than deadlock.
    const found: { id: string; acknowledged_at: Date | null }[] = await m.query(
      'SELECT id, acknowledged_at FROM drift_alerts WHERE id = ANY($1::uuid[]) ORDER BY id FOR UPDATE',
      [unique],
    );
    if (found.length !== unique.length) throw notFound(`${unique.length - found.length} of the alerts`);
    const done = found.filter((f) => f.acknowledged_at);
    if (done.length) throw conflict(`${done.length} of the chosen alerts ${done.length === 1 ? 'has' : 'have'} already been acknowledged; reload the list and choose again`);
    await m.query('UPDATE drift_alerts SET acknowledged_by = $2, acknowledged_at = now(), ack_note = $3 WHERE id = ANY($1::uuid[])', [unique, actor.id, note]);
    for (const id of unique) {
      await appendAudit({ actorId: actor.id, actorEmail: actor.email, action: 'drift_alert.acknowledged', targetType: 'drift_alert', targetId: id, sourceIp: ip, details: { note, together: unique.length } }, m);
    }
    const rows: AlertRow[] = await m.query(`${ALERT_SELECT} WHERE a.id = ANY($1::uuid[]) ORDER BY a.raised_at DESC`, [unique]);
    return rows.map(toAlertView);
  });
}
