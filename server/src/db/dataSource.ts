import 'reflect-metadata';
import { DataSource } from 'typeorm';
import { config } from '../config';
import { entities } from '../entities';
import { migrations } from '../migrations';

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
  extra: { max: Number(process.env.PLUMBLINE_DB_POOL ?? 10), connectionTimeoutMillis: 3000 },
});

export async function initDatabase(runMigrations = true): Promise<DataSource> {
  if (!dataSource.isInitialized) await dataSource.initialize();
  if (runMigrations) await dataSource.runMigrations({ transaction: 'each' });
  return dataSource;
}

export async function closeDatabase(): Promise<void> {
  if (dataSource.isInitialized) await dataSource.destroy();
}
