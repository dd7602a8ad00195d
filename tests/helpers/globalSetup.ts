// Runs once before the database-backed suites: migrate the throwaway database and seed the demo accounts.
import 'reflect-metadata';
import { closeDatabase, initDatabase } from '../../server/src/db/dataSource';
import { seedAccounts } from '../../server/src/db/seeds/accounts';

export default async function setup() {
  await initDatabase(true);
  await seedAccounts();
  await closeDatabase();
}
