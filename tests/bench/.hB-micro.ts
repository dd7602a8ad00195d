import 'reflect-metadata';
import { initDatabase, dataSource } from '../../server/src/db/dataSource';
import * as runs from '../../server/src/services/runs';
import * as cards from '../../server/src/services/scorecards';
import * as cohorts from '../../server/src/services/cohorts';
async function time(name: string, f: () => Promise<unknown>, n = 200) {
  for (let i = 0; i < 20; i++) await f();
  const t0 = performance.now();
  let size = 0;
  for (let i = 0; i < n; i++) { const r = await f(); if (i === 0) size = JSON.stringify(r).length; }
  const t1 = performance.now();
  const r = await f();
  const t2 = performance.now(); for (let i = 0; i < n; i++) JSON.stringify(r); const t3 = performance.now();
  console.log(`${name}: ${((t1 - t0) / n).toFixed(3)} ms/call, stringify ${((t3 - t2) / n).toFixed(3)} ms, ${size} B`);
}
await initDatabase(false);
const id = process.argv[2];
await time('select 1', () => dataSource.query('SELECT 1'));
await time('getRun', () => runs.getRun(id));
await time('listScoreCards', () => cards.listScoreCards());
await time('listCohorts', () => cohorts.listCohorts({ page: 1, pageSize: 25, sortBy: 'name', sortDir: 'asc' }));
await dataSource.destroy();
