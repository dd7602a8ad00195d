// npm run restore -- --file FILE --database NAME [--replace]
// Restores a backup made by `npm run backup` into a database on the PG* server (created if missing; an existing
// database with tables is refused unless --replace, which drops and re-creates it), then checks the audit chain there.
import 'reflect-metadata';
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { DataSource } from 'typeorm';
import { config } from '../src/platform/config';
import { entities } from '../src/platform/database/entities';
import { verifyAuditChain } from '../src/domain/accounts/audit';
import { argValue, hasFlag, pgBinary, pgEnv, tableCounts } from './pgTools';

const quoteIdent = (name: string) => `"${name.replace(/"/g, '""')}"`;

function psql(database: string, sql: string): string {
  const res = spawnSync(pgBinary('psql'), ['-tAq', '-v', 'ON_ERROR_STOP=1', '-c', sql, database], {
    env: pgEnv(database),
    encoding: 'utf8',
  });
  if (res.status !== 0) throw new Error(`psql failed: ${res.stderr}`);
  return res.stdout.trim();
}

async function main() {
  const file = argValue('file');
  const database = argValue('database');
  if (!file || !database) throw new Error('usage: npm run restore -- --file FILE --database NAME [--replace]');
  if (!existsSync(file)) throw new Error(`no such backup file: ${file}`);
  if (!/^[A-Za-z_][A-Za-z0-9_]{0,62}$/.test(database)) throw new Error('database name: letters, digits and _ only');

  const exists = psql('postgres', `SELECT 1 FROM pg_database WHERE datname = '${database}'`) === '1';
  const tables = exists ? Number(psql(database, `SELECT count(*) FROM pg_tables WHERE schemaname = 'public'`)) : 0;
  if (tables > 0 && !hasFlag('replace'))
    throw new Error(`database ${database} already holds ${tables} tables; restore into a new name or pass --replace`);
  if (tables > 0) psql('postgres', `DROP DATABASE ${quoteIdent(database)} WITH (FORCE)`);
  // An existing empty database is used as it is; otherwise a new one.
  if (!exists || tables > 0) psql('postgres', `CREATE DATABASE ${quoteIdent(database)}`);

  const res = spawnSync(
    pgBinary('pg_restore'),
    ['--no-owner', '--no-privileges', '--exit-on-error', '--single-transaction', '-d', database, file],
    {
      env: pgEnv(database),
      encoding: 'utf8',
    },
  );
  if (res.status !== 0) throw new Error(`pg_restore failed (${res.status ?? res.error?.message}): ${res.stderr}`);

  const restored = new DataSource({
    type: 'postgres',
    host: config.dbOwner.host,
    port: config.dbOwner.port,
    username: config.dbOwner.user,
    password: config.dbOwner.password,
    database,
    entities,
  });
  await restored.initialize();
  try {
    const counts = await tableCounts((sql) => restored.query(sql));
    const chain = await verifyAuditChain(restored.manager);
    console.log(JSON.stringify({ file, database, counts, auditChain: chain }, null, 2));
    if (!chain.ok)
      throw new Error(`restored, but the audit chain does not verify: ${chain.reason} at seq ${chain.firstBrokenSeq}`);
    console.log(`restored into ${database}; audit chain verified (${chain.entries} entries)`);
  } finally {
    await restored.destroy();
  }
}

main().catch((err) => {
  console.error(`restore failed: ${(err as Error).message}`);
  process.exit(1);
});
