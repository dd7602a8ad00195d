import 'reflect-metadata';
import { DataSource } from 'typeorm';
import { config } from '../config';
import { entities } from './entities';
import { migrations } from './migrations';
import { ensureRuntimeRole, grantRuntimeRole } from './runtimeRole';

/** The API's connection: the runtime role (config.db), which owns nothing and cannot switch off a trigger. */
export const dataSource = new DataSource({
  type: 'postgres',
  host: config.db.host,
  port: config.db.port,
  username: config.db.user,
  password: config.db.password,
  database: config.db.database,
  entities,
  migrations,
  synchronize: false,
  migrationsRun: false,
  logging: false,
  // A refused connection fails at once; the timeout only bounds a wait for a free pool slot, which a busy machine's
  // bursts (25 parallel sign-ins, each appending to the audit chain in turn) can stretch past 3 s.
  extra: { max: config.dbPoolSize, connectionTimeoutMillis: 10_000 },
});

/** A short-lived connection as the owner role (config.dbOwner): migrations, the runtime role, owner-only test fixtures. */
export function createOwnerDataSource(): DataSource {
  return new DataSource({
    type: 'postgres',
    host: config.dbOwner.host,
    port: config.dbOwner.port,
    username: config.dbOwner.user,
    password: config.dbOwner.password,
    database: config.dbOwner.database,
    entities,
    migrations,
    synchronize: false,
    logging: false,
    extra: { max: 2, connectionTimeoutMillis: 10_000 },
  });
}

/** As the owner: runs the migrations, then creates or updates the runtime role and gives it its grants. */
export async function prepareDatabase(): Promise<void> {
  const owner = createOwnerDataSource();
  await owner.initialize();
  try {
    await owner.runMigrations({ transaction: 'each' });
    await owner.transaction(async (m) => {
      if (config.manageRuntimeRole) await ensureRuntimeRole(m, config.db.user, config.db.password);
      await grantRuntimeRole(m, config.db.user, config.db.database);
    });
  } finally {
    await owner.destroy();
  }
}

/** Opens the runtime connection; with `prepare`, migrates and sets up the runtime role first (as the owner). */
export async function initDatabase(prepare = true): Promise<DataSource> {
  if (prepare) await prepareDatabase();
  if (!dataSource.isInitialized) await dataSource.initialize();
  return dataSource;
}

export async function closeDatabase(): Promise<void> {
  if (dataSource.isInitialized) await dataSource.destroy();
}
