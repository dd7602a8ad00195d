// Pool task for one validation run, or for one drift series (jobs/threads/pool.ts): it reads its own inputs from PostgreSQL
// through its own connection, so the API thread neither loads nor decodes the cohort, posts progress on the port it is
// given and returns the results (or an error).
import type { MessagePort } from 'node:worker_threads';
import pg from 'pg';
import type { AdequacyPrecision } from '@shared/adequacy';
import { precision, runPrecisionInputs } from '../../domain/runs/adequacyPrecision';
import type { Query } from '../../domain/cohorts/cohortData';
import { driftSeriesOf, storeDriftSeries, type DriftSeriesPart } from '../../domain/drift/driftSeries';
import { computeRunResults, RunInputError } from '../../domain/runs/runCompute';
import { loadRunInput } from '../../domain/runs/runInput';

export type RunJob =
  | { task: 'run'; scoreVersionId: string; cohortVersionId: string; settings: unknown; db: pg.ClientConfig }
  /** Works out and stores the drift series of a pair that has none (a run completed before series were kept). */
  | { task: 'drift-series'; scoreVersionId: string; cohortVersionId: string; db: pg.ClientConfig };

/** A run task as the pool receives it: the job and, for runs that report progress, the port to post it on. */
export type RunTask = RunJob & { progress?: MessagePort };

export type RunWorkerMessage =
  | { type: 'progress'; fraction: number; message: string }
  | {
      type: 'done';
      results: unknown;
      inputsSha256: string;
      drift: DriftSeriesPart | null;
      precision: { n: number; events: number; auc: number | null; value: AdequacyPrecision } | null;
    }
  | { type: 'error'; message: string; inputError: boolean };

async function main(job: RunJob, post: (m: RunWorkerMessage) => void): Promise<void> {
  const client = new pg.Client({ ...job.db, application_name: `plumbline ${job.task}` });
  client.on('error', () => undefined); // a lost connection surfaces as the failed query
  await client.connect();
  const query: Query = async (sql, params) => (await client.query(sql, params as unknown[])).rows;
  try {
    const { input, inputsSha256 } = await loadRunInput(
      {
        scoreVersionId: job.scoreVersionId,
        cohortVersionId: job.cohortVersionId,
        settings: job.task === 'run' ? job.settings : {},
      },
      query,
    );
    if (job.task === 'drift-series') {
      await storeDriftSeries(
        query,
        job.scoreVersionId,
        job.cohortVersionId,
        null,
        driftSeriesOf(input.score, input.data),
      );
      post({ type: 'done', results: null, inputsSha256, drift: null, precision: null });
      return;
    }
    post({ type: 'progress', fraction: 0.01, message: 'Starting the computation' });
    const results = computeRunResults(input, (fraction, message) => post({ type: 'progress', fraction, message }));
    // The drift series of this (score version, cohort version), stored with the completed run by the caller (on the
    // complete cases, as the run's own figures).
    const drift = driftSeriesOf(input.score, input.data);
    // The run page's expected CI widths (adequacy) are worked out here too, not on the API thread when it is opened.
    const inputs = runPrecisionInputs(results as Parameters<typeof runPrecisionInputs>[0]);
    const widths = inputs && { ...inputs, value: precision(inputs.n, inputs.events, inputs.auc) };
    post({ type: 'done', results, inputsSha256, drift, precision: widths });
  } finally {
    await client.end().catch(() => undefined);
  }
}

/** The pool task: never throws for a failed run, so the caller learns whether the inputs were at fault. */
export async function run(task: RunTask): Promise<Exclude<RunWorkerMessage, { type: 'progress' }>> {
  const { progress, ...job } = task;
  let ending: Exclude<RunWorkerMessage, { type: 'progress' }> | null = null;
  try {
    await main(job as RunJob, (m) => {
      if (m.type === 'progress') progress?.postMessage(m);
      else ending = m;
    });
  } catch (err) {
    ending = {
      type: 'error',
      message: (err as Error).message ?? String(err),
      inputError: err instanceof RunInputError,
    };
  }
  // The port stays open: the caller reads what is left on it and then closes it.
  return ending ?? { type: 'error', message: 'the run ended without a result', inputError: false };
}
