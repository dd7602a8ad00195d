// The one entry module of every worker thread (jobs/threads/pool.ts): its default export runs a task by name. From the
// sources a thread loads it through boot.mjs (tsx); the production build bundles it into dist/server/tasks.js
// (server/scripts/build-server.mjs). The upload tasks load with the thread (the uploads pool keeps one warm); the rest
// load on a thread's first task of their kind, so a thread starts with only what it runs.
import type { AdequacyPrecision } from '@shared/adequacy';
import type { ValidationSettings } from '@shared/validation';
import type { ComparisonTask } from './comparisonWorker';
import type { RecalibrationTask } from './recalibrationWorker';
import type { RowsRequest } from './rowsWorker';
import type { RunTask } from './runWorker';
import { checkUpload, screenFile } from './uploadWorker';

const tasks = {
  checkUpload,
  screenFile,
  run: async (input: RunTask) => (await import('./runWorker')).run(input),
  /** Two score versions on the same patients (domain/comparisons/). */
  comparison: async (input: ComparisonTask) => (await import('./comparisonWorker')).comparison(input),
  rows: async (input: RowsRequest) => (await import('./rowsWorker')).rows(input),
  /** The mapped cells of an upload's rejected lines, read back from its temp file for the rejected-rows CSV. */
  cellsOnLines: async (input: Parameters<typeof import('../../domain/cohorts/csvFile').cellsOnLines>[0]) =>
    (await import('../../domain/cohorts/csvFile')).cellsOnLines(input),
  recalibration: async (input: RecalibrationTask) => (await import('./recalibrationWorker')).recalibration(input),
  /** The adequacy widths for (n, events, AUC): about 0.2 s of bisection the API thread must not spend. */
  precision: async (input: { n: number; events: number; auc: number | null }): Promise<AdequacyPrecision> =>
    (await import('../../domain/runs/adequacyPrecision')).precision(input.n, input.events, input.auc),
  /** Bootstrap replicates [from, to) of the full metric set: one range of a bootstrap spread over threads. */
  bootstrap: async (input: {
    p: Float64Array;
    y: Uint8Array;
    settings: ValidationSettings;
    from: number;
    to: number;
  }): Promise<Record<string, number>[]> =>
    (await import('../../stats/bootstrap')).runReplicates(input.p, input.y, input.settings, input.from, input.to),
};

export type Tasks = typeof tasks;
export type TaskName = keyof Tasks;

/** What a pool posts: the task's name and its input. */
export default function runTask<K extends TaskName>({
  name,
  input,
}: {
  name: K;
  input: Parameters<Tasks[K]>[0];
}): ReturnType<Tasks[K]> {
  return (tasks[name] as (input: Parameters<Tasks[K]>[0]) => ReturnType<Tasks[K]>)(input);
}
