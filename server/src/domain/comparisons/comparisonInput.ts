// What a score comparison's computation reads — both score versions, the cohort version's rows, the settings — and
// the hash over it. Called through the worker thread's own connection (jobs/threads/comparisonWorker.ts).
import { scoreComparisonSettingsSchema } from '@shared/scoreComparison';
import { notFound } from '../errors';
import { loadCohortData, mainQuery, type Query } from '../cohorts/cohortData';
import type { RunScoreInput } from '../runs/runCompute';
import { comparisonInputsSha256, type ComparisonComputeInput } from './comparisonCompute';

async function scoreInput(query: Query, id: string): Promise<RunScoreInput> {
  const [sv] = await query('SELECT mode, model, probability_column FROM score_versions WHERE id = $1', [id]);
  if (!sv) throw notFound('score version');
  return {
    mode: sv.mode as RunScoreInput['mode'],
    model: sv.model as RunScoreInput['model'],
    probabilityColumn: (sv.probability_column as string | null) ?? null,
  };
}

export async function loadComparisonInput(
  c: { firstScoreVersionId: string; secondScoreVersionId: string; cohortVersionId: string; settings: unknown },
  query: Query = mainQuery,
): Promise<{ input: ComparisonComputeInput; inputsSha256: string }> {
  const first = await scoreInput(query, c.firstScoreVersionId);
  const second = await scoreInput(query, c.secondScoreVersionId);
  const [cv] = await query('SELECT source_sha256, row_count FROM cohort_versions WHERE id = $1', [c.cohortVersionId]);
  if (!cv) throw notFound('cohort version');
  const settings = scoreComparisonSettingsSchema.parse(c.settings);
  const data = await loadCohortData(c.cohortVersionId, query);
  const cohort = { sourceSha256: cv.source_sha256 as string, rowCount: Number(cv.row_count) };
  return {
    input: { first, second, data, settings },
    inputsSha256: comparisonInputsSha256(first, second, cohort, settings),
  };
}
