// Pool task for one score comparison (jobs/threads/pool.ts): reads both score versions and the cohort through its own
// PostgreSQL connection, computes the comparison and returns it (or why it could not be computed), posting the share
// done on its progress port as it goes.
import type { MessagePort } from 'node:worker_threads';
import pg from 'pg';
import type { ScoreComparisonResults } from '@shared/scoreComparison';
import type { Query } from '../../domain/cohorts/cohortData';
import { computeComparison } from '../../domain/comparisons/comparisonCompute';
import { loadComparisonInput } from '../../domain/comparisons/comparisonInput';
import { RunInputError } from '../../domain/runs/runCompute';

export interface ComparisonTask {
  firstScoreVersionId: string;
  secondScoreVersionId: string;
  cohortVersionId: string;
  settings: unknown;
  db: pg.ClientConfig;
  /** Where the share done (0..1) is posted, at most once per percent. */
  progress?: MessagePort;
}

export type ComparisonAnswer =
  | { ok: true; results: ScoreComparisonResults; inputsSha256: string }
  | { ok: false; message: string; inputError: boolean };

export async function comparison(task: ComparisonTask): Promise<ComparisonAnswer> {
  const { progress, ...job } = task;
  let posted = 0;
  const onProgress = (fraction: number) => {
    if (fraction - posted < 0.01) return;
    posted = fraction;
    progress?.postMessage(fraction);
  };
  const client = new pg.Client({ ...job.db, application_name: 'plumbline comparison' });
  client.on('error', () => undefined); // a lost connection surfaces as the failed query
  try {
    await client.connect();
    const query: Query = async (sql, params) => (await client.query(sql, params as unknown[])).rows;
    onProgress(0.05);
    const { input, inputsSha256 } = await loadComparisonInput(job, query);
    onProgress(0.2);
    return { ok: true, results: computeComparison(input, onProgress), inputsSha256 };
  } catch (err) {
    return { ok: false, message: (err as Error).message ?? String(err), inputError: err instanceof RunInputError };
  } finally {
    await client.end().catch(() => undefined);
  }
}
