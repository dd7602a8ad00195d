// The API's database role (server/src/platform/database/runtimeRole.ts): not a superuser, owns no table, and holds only the grants it
// needs, so it cannot switch off the immutability triggers, empty a table or change a signed record. The suite runs
// as this role, like the server.
import { describe, expect, it } from 'vitest';
import { config } from '../../server/src/platform/config';
import { RUNTIME_GRANTS } from '../../server/src/platform/database/runtimeRole';
import { dataSource, ownerDataSource, useDatabase } from '../helpers/api';

useDatabase();

const denied = /permission denied|must be owner/;

describe('the runtime database role', () => {
  it('is the configured role, not a superuser, and owns no table', async () => {
    const [s] = await dataSource.query(
      `SELECT current_user AS usr, current_setting('is_superuser') AS su, r.rolcreaterole, r.rolcreatedb, r.rolbypassrls,
              (SELECT count(*)::int FROM pg_tables t WHERE t.schemaname = 'public' AND t.tableowner = current_user) AS owned
       FROM pg_roles r WHERE r.rolname = current_user`,
    );
    expect(s.usr).toBe(config.db.user);
    expect(s.su).toBe('off');
    expect([s.rolcreaterole, s.rolcreatedb, s.rolbypassrls]).toEqual([false, false, false]);
    expect(s.owned).toBe(0);
  });

  it('cannot switch off triggers with session_replication_role', async () => {
    await expect(dataSource.query(`SET session_replication_role = replica`)).rejects.toThrow(/permission denied/);
  });

  it('cannot TRUNCATE any table', async () => {
    for (const t of [
      'audit_log',
      'signatures',
      'run_reviews',
      'cohort_row_blocks',
      'users',
      'validation_runs',
      'email_outbox',
    ]) {
      await expect(dataSource.query(`TRUNCATE ${t} CASCADE`), t).rejects.toThrow(denied);
    }
  });

  it('works the job queue (pgboss schema) but cannot create, drop or empty its tables, nor create a queue', async () => {
    await expect(dataSource.query('CREATE TABLE pgboss.plumbline_probe (x int)')).rejects.toThrow(denied);
    await expect(dataSource.query('DROP TABLE pgboss.archive')).rejects.toThrow(denied);
    await expect(dataSource.query('TRUNCATE pgboss.job')).rejects.toThrow(denied);
    // Creating a queue creates its partition table: only the owner's migration does that.
    await expect(
      dataSource.query(`SELECT pgboss.create_queue('plumbline-probe', '{"policy":"standard"}'::json)`),
    ).rejects.toThrow(denied);
    const rows: { table_name: string; privilege_type: string }[] = await dataSource.query(
      `SELECT table_name, privilege_type FROM information_schema.role_table_grants WHERE grantee = current_user AND table_schema = 'pgboss'`,
    );
    const held = (t: string) =>
      rows
        .filter((r) => r.table_name === t)
        .map((r) => r.privilege_type)
        .sort();
    expect(held('job')).toEqual(['DELETE', 'INSERT', 'SELECT', 'UPDATE']);
    expect(held('queue')).toEqual(['SELECT']);
    expect(held('version')).toEqual(['SELECT', 'UPDATE']);
  });

  it('cannot disable a trigger, drop a table or create one', async () => {
    await expect(dataSource.query('ALTER TABLE signatures DISABLE TRIGGER signatures_immutable')).rejects.toThrow(
      denied,
    );
    await expect(dataSource.query('DROP TABLE run_comments')).rejects.toThrow(denied);
    await expect(dataSource.query('CREATE TABLE plumbline_probe (x int)')).rejects.toThrow(denied);
  });

  it('cannot change or delete a signed record, a review or an audit entry (no grant, before any trigger)', async () => {
    const [sig] = await dataSource.query(`SELECT id FROM signatures ORDER BY signed_at LIMIT 1`);
    expect(sig, 'the demo seed signs a run').toBeTruthy();
    await expect(dataSource.query(`UPDATE signatures SET reason = 'changed' WHERE id = $1`, [sig.id])).rejects.toThrow(
      /permission denied/,
    );
    await expect(dataSource.query(`DELETE FROM signatures WHERE id = $1`, [sig.id])).rejects.toThrow(
      /permission denied/,
    );
    await expect(dataSource.query(`UPDATE run_reviews SET verdict = 'fit for use'`)).rejects.toThrow(
      /permission denied/,
    );
    await expect(dataSource.query(`DELETE FROM run_reviews`)).rejects.toThrow(/permission denied/);
    await expect(dataSource.query(`DELETE FROM audit_log`)).rejects.toThrow(/permission denied/);
    await expect(dataSource.query(`DELETE FROM audit_checkpoints`)).rejects.toThrow(/permission denied/);
    await expect(dataSource.query(`UPDATE cohort_versions SET label = 'x'`)).rejects.toThrow(/permission denied/);
    await expect(dataSource.query(`INSERT INTO migrations (timestamp, name) VALUES (1, 'x')`)).rejects.toThrow(
      /permission denied/,
    );
  });

  it('has exactly the listed grants on the append-only tables', async () => {
    const rows: { table_name: string; privilege_type: string }[] = await dataSource.query(
      `SELECT table_name, privilege_type FROM information_schema.role_table_grants WHERE grantee = current_user AND table_schema = 'public'`,
    );
    const held = (t: string) =>
      rows
        .filter((r) => r.table_name === t)
        .map((r) => r.privilege_type)
        .sort();
    for (const t of ['audit_log', 'audit_checkpoints', 'signatures', 'run_comments', 'cohort_versions'])
      expect(held(t), t).toEqual(['INSERT', 'SELECT']);
    expect(RUNTIME_GRANTS.run_reviews).toContain('UPDATE (superseded_by)');
    expect(rows.some((r) => ['TRUNCATE', 'TRIGGER', 'REFERENCES'].includes(r.privilege_type))).toBe(false);
  });

  it('the owner role can do what the runtime role cannot (the refusals above are about the role)', async () => {
    const owner = await ownerDataSource();
    const qr = owner.createQueryRunner();
    await qr.startTransaction();
    try {
      await qr.query('SET LOCAL session_replication_role = replica');
      await qr.query(
        `UPDATE signatures SET reason = 'changed by the owner' WHERE id = (SELECT id FROM signatures LIMIT 1)`,
      );
    } finally {
      await qr.rollbackTransaction();
      await qr.release();
    }
  });
});
