// Checks made at start, before the server listens: the API's own database session has no powers beyond its grants,
// and a production database holds no demo account or demo password.
import bcrypt from 'bcryptjs';
import { config, DEMO_PASSWORD } from '../config';
import { dataSource } from './dataSource';

export class StartRefused extends Error {}

/** The runtime session must not be a superuser, bypass row security, or own any table (it could then drop a trigger). */
export async function checkRuntimeSession(): Promise<void> {
  const [s]: { usr: string; superuser: boolean; bypass: boolean; owned: number }[] = await dataSource.query(
    `SELECT current_user AS usr, r.rolsuper AS superuser, r.rolbypassrls AS bypass,
            (SELECT count(*)::int FROM pg_tables t WHERE t.schemaname = 'public' AND t.tableowner = current_user) AS owned
     FROM pg_roles r WHERE r.rolname = current_user`,
  );
  if (s.superuser || s.bypass)
    throw new StartRefused(
      `the API connects as "${s.usr}", a PostgreSQL superuser: set PLUMBLINE_DB_APP_USER to a role of its own`,
    );
  if (s.owned > 0)
    throw new StartRefused(
      `the API connects as "${s.usr}", which owns ${s.owned} table(s): the runtime role must own nothing (PLUMBLINE_DB_APP_USER)`,
    );
}

/** Production refuses the demo: any @demo.test account, or any active account whose password is the published demo one. */
export async function refuseDemoAccounts(): Promise<void> {
  const demo: { email: string }[] = await dataSource.query(
    `SELECT email FROM users WHERE lower(email) LIKE '%@demo.test' ORDER BY email`,
  );
  if (demo.length) {
    throw new StartRefused(
      `the database holds demo accounts (${demo.map((d) => d.email).join(', ')}): production never runs on demo data; use a new database`,
    );
  }
  const active: { email: string; password_hash: string }[] = await dataSource.query(
    'SELECT email, password_hash FROM users WHERE active',
  );
  for (const a of active) {
    if (await bcrypt.compare(DEMO_PASSWORD, a.password_hash))
      throw new StartRefused(
        `the account ${a.email} uses the published demo password: reset it before a production start`,
      );
  }
}

/** All start checks for the current mode. */
export async function startChecks(): Promise<void> {
  await checkRuntimeSession();
  if (config.production) await refuseDemoAccounts();
}
