// What a run's computation reads — the score version, the cohort version's rows and the settings — and the hash over
// it. Called through the run worker thread's own connection (jobs/threads/runWorker.ts), or dataSource in the seed.
import { runSettingsSchema } from '@shared/runs';
import { notFound } from '../errors';
import { loadCohortData, mainQuery, type Query } from '../cohorts/cohortData';
import { inputsSha256, type RunComputeInput, type RunScoreInput } from './runCompute';

export async function loadRunInput(
  run: { scoreVersionId: string; cohortVersionId: string; settings: unknown },
  query: Query = mainQuery,
): Promise<{ input: RunComputeInput; inputsSha256: string }> {
  const [sv] = await query('SELECT mode, model, probability_column FROM score_versions WHERE id = $1', [
    run.scoreVersionId,
  ]);
  if (!sv) throw notFound('score version');
  const score: RunScoreInput = {
    mode: sv.mode as RunScoreInput['mode'],
    model: sv.model as RunScoreInput['model'],
    probabilityColumn: (sv.probability_column as string | null) ?? null,
  };
  const [cv] = await query('SELECT source_sha256, row_count FROM cohort_versions WHERE id = $1', [run.cohortVersionId]);
  if (!cv) throw notFound('cohort version');
  const data = await loadCohortData(run.cohortVersionId, query);
  const settings = runSettingsSchema.parse(run.settings);
  return {
    input: { score, data, settings },
    inputsSha256: inputsSha256(
      score,
      { sourceSha256: cv.source_sha256 as string, rowCount: Number(cv.row_count) },
      settings,
    ),
  };
}
