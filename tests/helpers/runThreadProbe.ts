// Run by tests/api/runs.test.ts under plain tsx (as the server runs): computes a small invented cohort in the run
// worker thread and prints the result hash, so the thread start-up is proven outside vitest too.
import { computeRunResults, resultsSha256, type RunComputeInput } from '../../server/src/services/runCompute';
import { computeInThread } from '../../server/src/services/runThread';
import { runSettingsSchema } from '../../shared/src/runs';
import { FIXTURE_MODEL, kestrelRows } from './fixtures';

const rows = kestrelRows(600, 5);
const columns: Record<string, (number | string)[]> = {};
for (const k of Object.keys(rows[0].predictors)) columns[k] = rows.map((r) => r.predictors[k]);
const input: RunComputeInput = {
  score: { mode: 'formula', model: FIXTURE_MODEL, probabilityColumn: null },
  data: {
    cohortVersionId: 'probe',
    n: rows.length,
    outcome: Uint8Array.from(rows.map((r) => r.outcome)),
    lineNo: Int32Array.from(rows.map((_, i) => i + 1)),
    columns,
    eventDate: rows.map((r) => r.eventDate ?? null),
    subgroups: { sex: rows.map((r) => r.subgroups!.sex) },
  },
  settings: runSettingsSchema.parse({ subgroupColumns: ['sex'], timeGrouping: 'quarter' }),
};
const threaded = await computeInThread(input).result;
console.log(JSON.stringify({ threaded: resultsSha256(threaded), inline: resultsSha256(computeRunResults(input)) }));
