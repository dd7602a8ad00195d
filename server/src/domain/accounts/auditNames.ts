// The audit page shows who and what in words: the actor's name and a name for each target (score, cohort version,
// run…), looked up in one query per kind of target, never stored in the chained entries themselves.
import { dataSource } from '../../platform/database/dataSource';
import { RUN_SCORE_COHORT_JOIN } from '../runs/runJoin';

export interface NamedEntry {
  actorId: string | null;
  targetType: string | null;
  targetId: string | null;
}

// One query per target type: id → a name a person recognises.
const TARGET_NAMES: Record<string, string> = {
  user: `SELECT id::text, coalesce(nullif(name, ''), email) AS name FROM users WHERE id::text = ANY($1)`,
  score: `SELECT id::text, name FROM scores WHERE id::text = ANY($1)`,
  score_version: `SELECT sv.id::text, s.name || ' version ' || sv.version AS name FROM score_versions sv JOIN scores s ON s.id = sv.score_id WHERE sv.id::text = ANY($1)`,
  cohort_version: `SELECT cv.id::text, c.name || ' version ' || cv.version AS name FROM cohort_versions cv JOIN cohorts c ON c.id = cv.cohort_id WHERE cv.id::text = ANY($1)`,
  cohort_upload: `SELECT u.id::text, 'upload of ' || u.source_filename AS name FROM cohort_uploads u WHERE u.id::text = ANY($1)`,
  validation_run: `SELECT r.id::text, 'run of ' || s.name || ' v' || sv.version || ' on ' || c.name || ' v' || cv.version AS name
    FROM ${RUN_SCORE_COHORT_JOIN} WHERE r.id::text = ANY($1)`,
  drift_alert: `SELECT a.id::text, 'alert on ' || s.name || ' v' || sv.version || ', ' || a.period AS name
    FROM drift_alerts a JOIN score_versions sv ON sv.id = a.score_version_id JOIN scores s ON s.id = sv.score_id WHERE a.id::text = ANY($1)`,
  alert_rule: `SELECT r.id::text, 'alert rule on ' || s.name AS name FROM alert_rules r JOIN scores s ON s.id = r.score_id WHERE r.id::text = ANY($1)`,
  column_mapping: `SELECT id::text, 'mapping ' || name AS name FROM column_mappings WHERE id::text = ANY($1)`,
};

/** The entries with `actorName` and `targetName` added (null where nothing is known, e.g. a target since removed). */
export async function withNames<T extends NamedEntry>(
  entries: T[],
): Promise<(T & { actorName: string | null; targetName: string | null })[]> {
  const byType = new Map<string, Set<string>>();
  const add = (type: string, id: string | null) => {
    if (!id || !TARGET_NAMES[type]) return;
    if (!byType.has(type)) byType.set(type, new Set());
    byType.get(type)!.add(id);
  };
  for (const e of entries) {
    add('user', e.actorId);
    if (e.targetType) add(e.targetType, e.targetId);
  }
  const names = new Map<string, string>();
  for (const [type, ids] of byType) {
    const rows: { id: string; name: string }[] = await dataSource.query(TARGET_NAMES[type], [[...ids]]).catch(() => []);
    for (const r of rows) names.set(`${type}:${r.id}`, r.name);
  }
  return entries.map((e) => ({
    ...e,
    actorName: e.actorId ? (names.get(`user:${e.actorId}`) ?? null) : null,
    targetName: e.targetType && e.targetId ? (names.get(`${e.targetType}:${e.targetId}`) ?? null) : null,
  }));
}
