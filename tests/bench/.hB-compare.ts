import 'reflect-metadata';
import { isDeepStrictEqual } from 'node:util';
import { initDatabase, dataSource } from '../../server/src/db/dataSource';
import * as runs from '../../server/src/services/runs';
import * as cards from '../../server/src/services/scorecards';
import * as oldCards from '../../server/src/services/.hBOldScorecards';
await initDatabase(false);
const a = await cards.listScoreCards(); const b = await oldCards.listScoreCards();
console.log('scorecards equal', isDeepStrictEqual(JSON.parse(JSON.stringify(a)), JSON.parse(JSON.stringify(b))), a.length);
const ids: { id: string; status: string }[] = await dataSource.query('SELECT id, status FROM validation_runs');
let same = 0;
for (const { id } of ids) {
  const d1 = await runs.getRun(id); const d2 = await runs.getRun(id);
  const raw = (await dataSource.query(`SELECT results, settings, CASE WHEN status='completed' THEN jsonb_build_object('n', results->'overall'->'n', 'events', results->'overall'->'events', 'auc', results->'overall'->'auc'->'estimate', 'oe', results->'overall'->'oe'->'estimate') END AS headline FROM validation_runs WHERE id=$1`, [id]))[0];
  if (isDeepStrictEqual(JSON.parse(JSON.stringify(d1)), JSON.parse(JSON.stringify(d2))) && isDeepStrictEqual(JSON.parse(JSON.stringify(d1.results)), raw.results) && isDeepStrictEqual(d1.headline, raw.headline)) same++;
  else console.log('differs', id);
}
console.log('runs equal', same, 'of', ids.length);
const oldQ = `SELECT r.id, (r.results->'overall'->>'n')::int AS n, (r.results->'overall'->>'events')::int AS events, r.results->'overall'->'auc' AS auc, r.results->'overall'->'calibrationIntercept' AS citl, r.results->'overall'->'calibrationSlope' AS slope, r.results->'overall'->'oe' AS oe FROM validation_runs r ORDER BY r.id`;
const newQ = `SELECT r.id, (ov.o->>'n')::int AS n, (ov.o->>'events')::int AS events, ov.o->'auc' AS auc, ov.o->'calibrationIntercept' AS citl, ov.o->'calibrationSlope' AS slope, ov.o->'oe' AS oe FROM validation_runs r LEFT JOIN LATERAL (SELECT r.results->'overall' AS o OFFSET 0) ov ON true ORDER BY r.id`;
console.log('drift rows equal', isDeepStrictEqual(await dataSource.query(oldQ), await dataSource.query(newQ)));
await dataSource.destroy();
