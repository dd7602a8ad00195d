// Pool task for one score comparison (jobs/threads/pool.ts): reads both score versions and the cohort through its own
// PostgreSQL connection, computes the comparison and returns it (or why it could not be computed).
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
}

export type ComparisonAnswer =
  | { ok: true; results: ScoreComparisonResults; inputsSha256: string }
  | { ok: false; message: string; inputError: boolean };

export async function comparison(task: ComparisonTask): Promise<ComparisonAnswer> {
  const client = new pg.Client({ ...task.db, application_name: 'plumbline comparison' });
  client.on('error', () => undefined); // a lost connection surfaces as the failed query
  try {
    await client.connect();
    const query: Query = async (sql, params) => (await client.query(sql, params as unknown[])).rows;
    const { input, inputsSha256 } = await loadComparisonInput(task, query);
    return { ok: true, results: computeComparison(input), inputsSha256 };
  } catch (err) {
    return { ok: false, message: (err as Error).message ?? String(err), inputError: err instanceof RunInputError };
  } finally {
    await client.end().catch(() => undefined);
  }
}
