// prints the SQL behind a service call by capturing dataSource.query
import 'reflect-metadata';
import { initDatabase, dataSource } from '../../server/src/db/dataSource';
import * as cards from '../../server/src/services/scorecards';
import * as runs from '../../server/src/services/runs';
import * as cohorts from '../../server/src/services/cohorts';
await initDatabase(false);
const orig = dataSource.query.bind(dataSource);
const seen: [string, unknown[]][] = [];
(dataSource as unknown as { query: unknown }).query = (q: string, p?: unknown[]) => { seen.push([q, p ?? []]); return orig(q, p); };
const m = dataSource.manager as unknown as { query: unknown };
const origM = dataSource.manager.query.bind(dataSource.manager);
m.query = (q: string, p?: unknown[]) => { seen.push([q, p ?? []]); return origM(q, p); };
await cards.listScoreCards();
await cohorts.listCohorts({ page: 1, pageSize: 25, sortBy: 'name', sortDir: 'asc' });
await runs.getRun(process.argv[2]);
for (const [q, p] of seen) {
  let i = 0;
  const lit = q.replace(/\$(\d+)/g, (_, n) => { const v = p[Number(n) - 1]; return v === null ? 'NULL' : typeof v === 'number' ? String(v) : `'${String(v)}'`; });
  for (let k = 0; k < 5; k++) {
    const plan: { 'QUERY PLAN': string }[] = await orig(`EXPLAIN ANALYZE ${lit}`);
    if (k === 4) console.log(q.slice(0, 60).replace(/\s+/g, ' '), '|', plan.filter((r) => /Planning|Execution/.test(r['QUERY PLAN'])).map((r) => r['QUERY PLAN']).join(' '));
  }
  i++;
}
await dataSource.destroy();
