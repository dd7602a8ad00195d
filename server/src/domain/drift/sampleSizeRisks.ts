// The predicted risks of a completed run's cohort, for the sample-size planner's empirical LP distribution. They come
// from the run's stored drift series (domain/drift/driftSeries.ts), worked out in a worker thread when a run stored
// before series were kept has none, so the API thread never loads a cohort or applies a formula.
import { computeInThread } from '../../jobs/threads/pool';
import { mainQuery } from '../cohorts/cohortData';
import { invalid, notFound } from '../errors';
import { readDriftSeries } from './driftSeries';

export async function predictedRisksOfRun(runId: string): Promise<Float64Array> {
  const rows = await mainQuery(
    'SELECT score_version_id, cohort_version_id, status FROM validation_runs WHERE id = $1',
    [runId],
  );
  if (!rows.length) throw notFound('run');
  const { score_version_id: sv, cohort_version_id: cv, status } = rows[0] as Record<string, string>;
  if (status !== 'completed') throw invalid('the run has not completed, so its predicted risks are not stored');
  let found = await readDriftSeries(mainQuery, sv, [cv]);
  if (!found.has(cv)) {
    await computeInThread({ task: 'drift-series', scoreVersionId: sv, cohortVersionId: cv }).result;
    found = await readDriftSeries(mainQuery, sv, [cv]);
  }
  const series = found.get(cv);
  if (!series) throw notFound('predicted risks of the run');
  return series.p;
}
