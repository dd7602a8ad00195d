// Runs once before the database-backed suites: migrate the throwaway database and seed the whole invented demo scenario (the browser tests read it).
import 'reflect-metadata';
import { closeDatabase, initDatabase } from '../../server/src/platform/database/dataSource';
import { seedDemo } from '../../server/src/demo/seed';

export default async function setup() {
  await initDatabase(true);
  await seedDemo();
  await closeDatabase();
}
