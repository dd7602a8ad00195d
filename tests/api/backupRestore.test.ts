// npm run backup / npm run restore (Debian's pg_dump -Fc / pg_restore): restore into a fresh database on the same
// server and check every table's row count and the audit hash chain there.
import 'reflect-metadata';
import { randomUUID } from 'node:crypto';
import { mkdtempSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { DataSource } from 'typeorm';
import { afterAll, describe, expect, it } from 'vitest';
import { config } from '../../server/src/platform/config';
import { entities } from '../../server/src/platform/database/entities';
import { appendAudit, verifyAuditChain } from '../../server/src/domain/accounts/audit';
import { dataSource, ownerQuery, useDatabase } from '../helpers/api';
import { runTsx } from '../helpers/childServer';
import { tableCounts } from '../helpers/routeProbe';

useDatabase();

const dir = mkdtempSync(path.join(tmpdir(), 'plumbline-backup-'));
const target = `plumbline_restore_${randomUUID().slice(0, 8)}`;
let restored: DataSource | undefined;

afterAll(async () => {
  await restored?.destroy().catch(() => undefined);
  await ownerQuery(`DROP DATABASE IF EXISTS ${target} WITH (FORCE)`).catch(() => undefined);
  rmSync(dir, { recursive: true, force: true });
});

// Backup and restore are the owner's tools (server/scripts/pgTools.ts).
const env = () => ({
  PGHOST: config.dbOwner.host,
  PGPORT: String(config.dbOwner.port),
  PGUSER: config.dbOwner.user,
  PGDATABASE: config.dbOwner.database,
});

describe('backup and restore', () => {
  it('restores into a fresh database with the same row counts and a verifying audit chain', async () => {
    await appendAudit({ action: 'test.backup_marker', details: { note: 'entry written just before the backup' } });
    const before = await tableCounts((sql) => dataSource.query(sql));
    expect(before.audit_log).toBeGreaterThan(0);
    const file = path.join(dir, 'plumbline.dump');

    const backupOut = runTsx('server/scripts/backup.ts', env(), ['--out', file]);
    expect(backupOut).toMatch(/backup written/);
    expect(statSync(file).size).toBeGreaterThan(1000);

    const restoreOut = runTsx('server/scripts/restore.ts', env(), ['--file', file, '--database', target]);
    expect(restoreOut).toMatch(/audit chain verified/);

    restored = new DataSource({
      type: 'postgres',
      host: config.dbOwner.host,
      port: config.dbOwner.port,
      username: config.dbOwner.user,
      password: config.dbOwner.password,
      database: target,
      entities,
    });
    await restored.initialize();
    const after = await tableCounts((sql) => restored!.query(sql));
    expect(after).toEqual(before);
    const chain = await verifyAuditChain(restored.manager);
    expect(chain).toMatchObject({ ok: true, entries: before.audit_log });
    const marker = await restored.query(`SELECT count(*)::int AS n FROM audit_log WHERE action = 'test.backup_marker'`);
    expect(marker[0].n).toBeGreaterThan(0);
    // The migrations' immutability triggers came along too: a stored audit row cannot be edited in the copy.
    await expect(
      restored.query(`UPDATE audit_log SET action = 'x' WHERE seq = (SELECT max(seq) FROM audit_log)`),
    ).rejects.toThrow();
    const migrations = await restored.query('SELECT count(*)::int AS n FROM migrations');
    expect(migrations[0].n).toBe(before.migrations);
  });

  it('refuses to restore over a database that already holds tables', () => {
    expect(() =>
      runTsx('server/scripts/restore.ts', env(), ['--file', path.join(dir, 'plumbline.dump'), '--database', target]),
    ).toThrow(/already holds/);
  });

  it('the chain check fails on a tampered copy (the verification can fail)', async () => {
    // Tampering needs the trigger out of the way, as an attacker with database rights would do.
    await restored!.query(`ALTER TABLE audit_log DISABLE TRIGGER USER`);
    await restored!.query(
      `UPDATE audit_log SET details = '{"tampered": true}' WHERE seq = (SELECT min(seq) FROM audit_log)`,
    );
    const chain = await verifyAuditChain(restored!.manager);
    expect(chain.ok).toBe(false);
    expect(chain.reason).toMatch(/does not match/);
  });
});
