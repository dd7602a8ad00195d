// The one entry module of every worker thread (workers/pool.ts): its default export runs a task by name. From the
// sources a thread loads it through boot.mjs (tsx); the production build bundles it into dist/server/tasks.js
// (server/scripts/build-server.mjs).
import type { AdequacyPrecision } from '@shared/adequacy';
import type { ValidationSettings } from '@shared/validation';
import { precision as widths } from '../services/adequacyPrecision';
import { runReplicates } from '../stats/bootstrap';

import { recalibration } from './recalibrationWorker';
import { rows } from './rowsWorker';
import { run } from './runWorker';
import { checkUpload, screenFile } from './uploadWorker';

/** The adequacy widths for (n, events, AUC): about 0.2 s of bisection the API thread must not spend. */
function precision(job: { n: number; events: number; auc: number | null }): AdequacyPrecision {
  return widths(job.n, job.events, job.auc);
}

/** Bootstrap replicates [from, to) of the full metric set: one range of a bootstrap spread over threads. */
function bootstrap(job: { p: Float64Array; y: Uint8Array; settings: ValidationSettings; from: number; to: number }): Record<string, number>[] {
  return runReplicates(job.p, job.y, job.settings, job.from, job.to);
}

const tasks = { run, checkUpload, screenFile, rows, recalibration, precision, bootstrap };

export type Tasks = typeof tasks;
export type TaskName = keyof Tasks;

/** What a pool posts: the task's name and its input. */
export default function runTask<K extends TaskName>({ name, input }: { name: K; input: Parameters<Tasks[K]>[0] }): ReturnType<Tasks[K]> {
  return (tasks[name] as (input: Parameters<Tasks[K]>[0]) => ReturnType<Tasks[K]>)(input);
}
