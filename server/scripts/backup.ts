// npm run backup -- --out FILE
// A consistent snapshot of the Plumbline database (PG* settings) in pg_dump's custom format (-Fc), with the row count
// of every table and the audit-chain state printed so the restore can be checked against them.
import 'reflect-metadata';
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdirSync, readFileSync, statSync } from 'node:fs';
import path from 'node:path';
import { config } from '../src/platform/config';
import { closeDatabase, dataSource } from '../src/platform/database/dataSource';
import { verifyAuditChain } from '../src/domain/accounts/audit';
import { argValue, pgBinary, pgEnv, tableCounts } from './pgTools';

async function main() {
  const stamp = new Date().toISOString().replace(/[:.]/g, '-');
  const out = path.resolve(argValue('out') ?? `backups/plumbline-${config.db.database}-${stamp}.dump`);
  mkdirSync(path.dirname(out), { recursive: true });
  // pg_dump takes one snapshot (repeatable read), so the counts below may differ only by writes made meanwhile.
  const res = spawnSync(pgBinary('pg_dump'), ['-Fc', '--no-owner', '--no-privileges', '-f', out, config.db.database], {
    env: pgEnv(),
    encoding: 'utf8',
  });
  if (res.status !== 0) throw new Error(`pg_dump failed (${res.status ?? res.error?.message}): ${res.stderr}`);

  await dataSource.initialize();
  const counts = await tableCounts((sql) => dataSource.query(sql));
  const chain = await verifyAuditChain();
  await closeDatabase();
  const sha256 = createHash('sha256').update(readFileSync(out)).digest('hex');
  console.log(
    JSON.stringify(
      { file: out, bytes: statSync(out).size, sha256, database: config.db.database, counts, auditChain: chain },
      null,
      2,
    ),
  );
  console.log(`backup written: ${out}`);
}

main().catch(async (err) => {
  console.error(`backup failed: ${(err as Error).message}`);
  await closeDatabase().catch(() => undefined);
  process.exit(1);
});
