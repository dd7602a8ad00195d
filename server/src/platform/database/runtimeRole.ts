// The runtime role the API connects as: no superuser, owns nothing, and holds only the grants below. Applied by the
// owner connection after the migrations at every start (platform/database/dataSource.ts, prepareDatabase), so a new table gets its
// grants on the next start. Append-only records get SELECT and INSERT only; their triggers then hold, because only a
// superuser (session_replication_role) or the owner (ALTER TABLE … DISABLE TRIGGER) could switch them off.
import type { EntityManager } from 'typeorm';

/** Tables with less than the default SELECT, INSERT, UPDATE. Anything not listed gets the default (never DELETE, TRUNCATE, TRIGGER or REFERENCES). */
export const RUNTIME_GRANTS: Record<string, string[]> = {
  // Append-only records: the hash-chained audit trail and its checkpoints, signatures, comments, stored cohort versions.
  audit_log: ['SELECT', 'INSERT'],
  audit_checkpoints: ['SELECT', 'INSERT'],
  signatures: ['SELECT', 'INSERT'],
  run_comments: ['SELECT', 'INSERT'],
  cohort_versions: ['SELECT', 'INSERT'],
  // A run's per-period drift series, stored once when the run completes.
  drift_series: ['SELECT', 'INSERT'],
  // A score comparison: stored queued, then only its job's columns change (the trigger lets it move only forward).
  score_comparisons: [
    'SELECT',
    'INSERT',
    'UPDATE (status, progress, error, completed_at, results, engine_version, inputs_sha256, results_sha256)',
  ],
  // A review is append-only except for the one link to the review that supersedes it.
  run_reviews: ['SELECT', 'INSERT', 'UPDATE (superseded_by)'],
  // Staged blocks of a checked upload are deleted on a new mapping or a discard; the trigger refuses it for stored ones.
  cohort_row_blocks: ['SELECT', 'INSERT', 'DELETE'],
  // The rejected cells of an upload are replaced when it is mapped again.
  cohort_upload_rejections: ['SELECT', 'INSERT', 'UPDATE', 'DELETE'],
  // The migrations' own bookkeeping: read only; only the owner migrates.
  migrations: ['SELECT'],
  // pg-boss (schema and queues created by a migration as the owner): jobs are inserted, claimed, completed, retried
  // (deleted and re-inserted) and archived; the maintenance stamp is updated; cron schedules are written at start.
  'pgboss.job': ['SELECT', 'INSERT', 'UPDATE', 'DELETE'],
  'pgboss.archive': ['SELECT', 'INSERT', 'DELETE'],
  'pgboss.version': ['SELECT', 'UPDATE'],
  'pgboss.queue': ['SELECT'],
  'pgboss.schedule': ['SELECT', 'INSERT', 'UPDATE', 'DELETE'],
  'pgboss.subscription': ['SELECT'],
};
/** Schemas besides public whose listed tables get grants (only those in RUNTIME_GRANTS; nothing by default). */
const OTHER_SCHEMAS = ['pgboss'];
const DEFAULT_GRANTS = ['SELECT', 'INSERT', 'UPDATE'];
const GRANT_LOCK = 7_316_002; // advisory lock key: two starts at once do not update the same grants concurrently

const ident = (name: string) => `"${name.replace(/"/g, '""')}"`;

/**
 * Creates the runtime role, or makes sure an existing one has no extra powers, and sets its password when one is given.
 * The statement is built by the server (format %I/%L), so neither name nor password is pasted into SQL here.
 */
export async function ensureRuntimeRole(m: EntityManager, role: string, password: string): Promise<void> {
  await m.query('SELECT pg_advisory_xact_lock($1)', [GRANT_LOCK]);
  const [exists] = await m.query('SELECT rolsuper FROM pg_roles WHERE rolname = $1', [role]);
  const attrs = 'LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE NOREPLICATION NOBYPASSRLS NOINHERIT';
  const [{ sql }] = await m.query(
    password
      ? `SELECT format('%s ROLE %I WITH ${attrs} PASSWORD %L', $1::text, $2::text, $3::text) AS sql`
      : `SELECT format('%s ROLE %I WITH ${attrs}', $1::text, $2::text) AS sql`,
    password ? [exists ? 'ALTER' : 'CREATE', role, password] : [exists ? 'ALTER' : 'CREATE', role],
  );
  await m.query(sql);
}

/** Gives the runtime role exactly the grants above on every table of the public schema (and nothing it held before). */
export async function grantRuntimeRole(m: EntityManager, role: string, database: string): Promise<void> {
  await m.query('SELECT pg_advisory_xact_lock($1)', [GRANT_LOCK]);
  const r = ident(role);
  // Usually held through PUBLIC already; granted only when missing (an owner of the tables need not own the database).
  const [has] = await m.query(
    `SELECT has_database_privilege($1, $2, 'CONNECT') AS connect, has_schema_privilege($1, 'public', 'USAGE') AS usage`,
    [role, database],
  );
  if (!has.connect) await m.query(`GRANT CONNECT ON DATABASE ${ident(database)} TO ${r}`);
  if (!has.usage) await m.query(`GRANT USAGE ON SCHEMA public TO ${r}`);
  const tables: { name: string }[] = await m.query(
    `SELECT tablename AS name FROM pg_tables WHERE schemaname = 'public' ORDER BY tablename`,
  );
  for (const { name } of tables) {
    const t = `public.${ident(name)}`;
    await m.query(`REVOKE ALL ON ${t} FROM ${r}`);
    await m.query(`GRANT ${(RUNTIME_GRANTS[name] ?? DEFAULT_GRANTS).join(', ')} ON ${t} TO ${r}`);
  }
  await m.query(`GRANT USAGE, SELECT ON ALL SEQUENCES IN SCHEMA public TO ${r}`);
  // The job queue's schema: usage, and only the listed tables (a queue's partition is reached through pgboss.job).
  for (const schema of OTHER_SCHEMAS) {
    const found: { name: string }[] = await m.query(
      `SELECT tablename AS name FROM pg_tables WHERE schemaname = $1 ORDER BY tablename`,
      [schema],
    );
    if (!found.length) continue;
    await m.query(`GRANT USAGE ON SCHEMA ${ident(schema)} TO ${r}`);
    for (const { name } of found) {
      const t = `${ident(schema)}.${ident(name)}`;
      await m.query(`REVOKE ALL ON ${t} FROM ${r}`);
      const grants = RUNTIME_GRANTS[`${schema}.${name}`];
      if (grants) await m.query(`GRANT ${grants.join(', ')} ON ${t} TO ${r}`);
    }
  }
}
