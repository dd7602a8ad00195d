// Stored records of completed validation runs, kept in memory so opening a run page does not pull its results (tens
// of kilobytes of TOASTed jsonb) from PostgreSQL and parse them again on every request.
//
// Why this cannot go stale: a run that is 'completed' is immutable — the trigger plumbline_run_guard (migration
// 1764633800000-Runs) refuses every UPDATE and DELETE of it, in every process — so the first committed read of a
// completed run is its final state. Callers only ask here after reading status 'completed' outside a transaction
// (a transaction's own uncommitted 'completed' could still roll back). Entries are deep-frozen so that no caller can
// change the shared copy by accident; bounded in count, least recently used dropped first.
import type { ValidationRun } from '../../platform/database/entities/ValidationRun';

const LIMIT = 64;
const records = new Map<string, Promise<ValidationRun>>();

function deepFreeze<T>(value: T): T {
  if (value && typeof value === 'object' && !Object.isFrozen(value)) {
    Object.freeze(value);
    for (const v of Object.values(value as Record<string, unknown>)) deepFreeze(v);
  }
  return value;
}

/** The record of a completed run: from memory, or `load()` once (concurrent first reads share one query). */
export function completedRunRecord(id: string, load: () => Promise<ValidationRun>): Promise<ValidationRun> {
  const hit = records.get(id);
  if (hit) {
    records.delete(id);
    records.set(id, hit);
    return hit;
  }
  const forget = () => {
    if (records.get(id) === loading) records.delete(id);
  };
  const loading: Promise<ValidationRun> = load().then((run) => {
    // Only a record that is really completed is kept; anything else is answered once and forgotten.
    if (run.status !== 'completed') forget();
    return run.status === 'completed' ? deepFreeze(run) : run;
  });
  records.set(id, loading);
  loading.catch(forget);
  if (records.size > LIMIT) records.delete(records.keys().next().value as string);
  return loading;
}

/** For tests: forget everything. */
export function clearRunRecordCache(): void {
  records.clear();
}
