// Migrates the database named by the PG* variables and creates the demo accounts (no demo scenario), then exits.
import 'reflect-metadata';
import { closeDatabase, initDatabase } from '../../../server/src/platform/database/dataSource';
import { seedAccounts } from '../../../server/src/demo/seeds/accounts';

await initDatabase(true);
await seedAccounts();
await closeDatabase();
console.log('database prepared');
