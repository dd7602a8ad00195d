// A review may name the score comparison it relied on: one on the run's own cohort version with the run's score
// version as one of its two sides, so the comparison speaks of the same patients and the same formula; and a completed
// one, since only that has results to rely on.
import type { EntityManager } from 'typeorm';
import { invalid } from '../errors';

export async function checkComparisonForRun(m: EntityManager, runId: string, comparisonId: string): Promise<string> {
  const rows: { ok: boolean; status: string }[] = await m.query(
    `SELECT sc.status, (sc.cohort_version_id = r.cohort_version_id
             AND r.score_version_id IN (sc.first_score_version_id, sc.second_score_version_id)) AS ok
     FROM score_comparisons sc, validation_runs r WHERE sc.id = $1 AND r.id = $2`,
    [comparisonId, runId],
  );
  if (!rows[0]) throw invalid('the named score comparison does not exist');
  if (rows[0].status !== 'completed')
    throw invalid(
      rows[0].status === 'failed'
        ? 'the named score comparison failed; a review can only rely on a completed comparison'
        : 'the named score comparison has not completed yet; a review can only rely on a completed comparison',
    );
  if (!rows[0].ok)
    throw invalid("the named score comparison is not on this run's cohort version with this run's score version");
  return comparisonId;
}
