// Run by tests/api/runs.test.ts under plain tsx (as the server runs): stores a small invented cohort, computes it in
// the run worker thread (which reads the cohort itself, through its own connection) and inline, and prints both
// result hashes and input hashes, so the thread start-up and its own loading are proven outside vitest too.
import 'reflect-metadata';
import { closeDatabase, initDatabase } from '../../server/src/platform/database/dataSource';
import { computeRunResults, resultsSha256 } from '../../server/src/domain/runs/runCompute';
import { loadRunInput } from '../../server/src/domain/runs/runInput';
import { computeInThread, stopPools } from '../../server/src/jobs/threads/pool';
import { runSettingsSchema } from '../../shared/src/runs';
import { createCohortFixture, createScoreFixture, kestrelRows } from './fixtures';

await initDatabase(false);
try {
  const score = await createScoreFixture({ name: `Thread probe ${Date.now()}` });
  const cohort = await createCohortFixture(kestrelRows(600, 5), { label: 'thread probe' });
  const settings = runSettingsSchema.parse({ subgroupColumns: ['sex'], timeGrouping: 'quarter' });
  const job = { scoreVersionId: score.scoreVersionId, cohortVersionId: cohort.cohortVersionId, settings };
  const threaded = await computeInThread({ task: 'run', ...job }).result;
  const inline = await loadRunInput(job);
  console.log(
    JSON.stringify({
      threaded: resultsSha256(threaded.results),
      inline: resultsSha256(computeRunResults(inline.input)),
      threadedInputs: threaded.inputsSha256,
      inlineInputs: inline.inputsSha256,
      driftPatients: threaded.drift?.n ?? null,
    }),
  );
} finally {
  await stopPools();
  await closeDatabase();
}
