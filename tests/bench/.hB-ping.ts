import 'reflect-metadata';
import { initDatabase, dataSource } from '../../server/src/db/dataSource';
await initDatabase(false);
for (let i = 0; i < 100; i++) await dataSource.query('SELECT 1');
let t = performance.now(); for (let i = 0; i < 1000; i++) await dataSource.query('SELECT 1'); console.log('typeorm dataSource.query', ((performance.now() - t) / 1000).toFixed(3));
const pool = (dataSource.driver as unknown as { master: { query: (s: string) => Promise<unknown> } }).master;
t = performance.now(); for (let i = 0; i < 1000; i++) await pool.query('SELECT 1'); console.log('underlying pool.query', ((performance.now() - t) / 1000).toFixed(3));
await dataSource.destroy();
