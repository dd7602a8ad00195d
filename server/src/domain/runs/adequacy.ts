// The `adequacy` block of run and cohort-version responses: the shared verdict (shared/src/adequacy.ts) plus the
// expected CI widths from precisionFor (Riley et al. 2021, server/src/stats/sampleSize.ts).
import {
  adequacyVerdict,
  ASSUMED_AUC,
  PRECISION_ASSUMPTION,
  type AdequacyAucSource,
  type CohortAdequacy,
} from '@shared/adequacy';
import { dataSource } from '../../platform/database/dataSource';
import { runPrecisionInputs } from './adequacyPrecision';
import { precisionOffThread } from './adequacyWidths';

export async function buildAdequacy(input: {
  n: number;
  events: number;
  auc: number | null;
  source: AdequacyAucSource;
  runId: string | null;
}): Promise<CohortAdequacy> {
  const { n, events } = input;
  const nonEvents = n - events;
  return {
    n,
    events,
    nonEvents,
    eventRate: n > 0 ? events / n : null,
    verdict: adequacyVerdict(events, nonEvents),
    auc: { value: input.auc, source: input.source, runId: input.runId },
    precision: await precisionOffThread(n, events, input.auc),
    assumption: PRECISION_ASSUMPTION,
  };
}

/** For a completed run: its own counts and AUC. */
export async function runAdequacy(run: {
  id: string;
  results: { overall: { n: number; events: number; auc: { estimate: number } } } | null;
}): Promise<CohortAdequacy | null> {
  const inputs = runPrecisionInputs(run.results);
  return inputs && buildAdequacy({ ...inputs, source: 'this run', runId: run.id });
}

/**
 * For a cohort version: the AUC comes from, in order, the latest completed run on this version, the run on which a
 * version of the cohort's score was approved, the score's latest completed run, or else ASSUMED_AUC (said so).
 */
export async function cohortVersionAdequacy(v: {
  id: string;
  cohortId: string;
  rowCount: number;
  events: number;
}): Promise<CohortAdequacy> {
  // Candidates are ranked without touching `results` (a large TOASTed jsonb); only the best few are opened.
  const rows: { auc: number | null; run_id: string; source: AdequacyAucSource }[] = await dataSource.query(
    `WITH candidates AS (
       SELECT 1 AS rank, r.id AS run_id, r.finished_at, 'run on this cohort version' AS source FROM validation_runs r
        WHERE r.cohort_version_id = $1 AND r.status = 'completed'
       UNION ALL
       SELECT 2, r.id, r.finished_at, 'approved run of the score' FROM validation_runs r
         JOIN score_versions sv ON sv.approved_run_id = r.id JOIN cohorts c ON c.score_id = sv.score_id
        WHERE c.id = $2 AND r.status = 'completed'
       UNION ALL
       SELECT 3, r.id, r.finished_at, 'latest run of the score' FROM validation_runs r
         JOIN score_versions sv ON sv.id = r.score_version_id JOIN cohorts c ON c.score_id = sv.score_id
        WHERE c.id = $2 AND r.status = 'completed'
     ), best AS (SELECT * FROM candidates ORDER BY rank, finished_at DESC NULLS LAST, run_id LIMIT 5)
     SELECT b.run_id, b.source,
            CASE WHEN jsonb_typeof(r.results->'overall'->'auc'->'estimate') = 'number' THEN (r.results->'overall'->'auc'->>'estimate')::float8 END AS auc
       FROM best b JOIN validation_runs r ON r.id = b.run_id
      ORDER BY b.rank, b.finished_at DESC NULLS LAST, b.run_id`,
    [v.id, v.cohortId],
  );
  const found = rows.find((r) => r.auc !== null && Number.isFinite(Number(r.auc)));
  return buildAdequacy({
    n: v.rowCount,
    events: v.events,
    auc: found ? Number(found.auc) : ASSUMED_AUC,
    source: found ? found.source : 'assumed',
    runId: found ? found.run_id : null,
  });
}
