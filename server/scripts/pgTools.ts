// Shared bits of the backup and restore scripts: Debian's PostgreSQL client binaries and the PG* connection settings.
import { existsSync } from 'node:fs';
import path from 'node:path';
import { config } from '../src/platform/config';

const DEBIAN_BIN = '/usr/lib/postgresql/15/bin';

/** Debian's versioned client first (matches the server), else the pg_wrapper on PATH. */
export function pgBinary(name: 'pg_dump' | 'pg_restore' | 'psql'): string {
  const dir = process.env.PLUMBLINE_PG_BIN ?? DEBIAN_BIN;
  const candidate = path.join(dir, name);
  return existsSync(candidate) ? candidate : name;
}

/**
 * The owner role's connection as libpq variables (the password travels in the environment, never on the command line):
 * a backup reads every table and a restore creates them, which the API's runtime role may not.
 */
export function pgEnv(database = config.dbOwner.database): NodeJS.ProcessEnv {
  return {
    ...process.env,
    PGHOST: config.dbOwner.host,
    PGPORT: String(config.dbOwner.port),
    PGUSER: config.dbOwner.user,
    PGDATABASE: database,
    ...(config.dbOwner.password ? { PGPASSWORD: config.dbOwner.password } : {}),
  };
}

/** --name value or --name=value from argv. */
export function argValue(name: string): string | undefined {
  const args = process.argv.slice(2);
  for (let i = 0; i < args.length; i++) {
    if (args[i] === `--${name}`) return args[i + 1];
    if (args[i].startsWith(`--${name}=`)) return args[i].slice(name.length + 3);
  }
  return undefined;
}

export const hasFlag = (name: string) => process.argv.slice(2).includes(`--${name}`);

/** Row count of every table in the public schema, via a query runner. */
export async function tableCounts(
  query: (sql: string) => Promise<{ t: string; n: string }[]>,
): Promise<Record<string, number>> {
  const tables = await query(
    `SELECT tablename AS t, '' AS n FROM pg_tables WHERE schemaname = 'public' ORDER BY tablename`,
  );
  const out: Record<string, number> = {};
  for (const { t } of tables)
    out[t] = Number((await query(`SELECT '' AS t, count(*)::text AS n FROM "${t.replace(/"/g, '""')}"`))[0].n);
  return out;
}
