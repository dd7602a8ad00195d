// Starts a worker thread by name. From the sources (tsx in the server, Vite in the tests) the thread starts from a small
// .mjs file (runWorkerBoot.mjs) that registers tsx inside the thread with the project's tsconfig and then imports the
// .ts worker (`execArgv: ['--import', 'tsx']` does not reach a worker's entry module on Node 20). In the production
// build (npm run build) each worker is its own compiled file next to the server's (dist/server/<name>.js), started as is.
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import { compiled } from '../config';

export type WorkerName = 'uploadWorker' | 'runWorker' | 'precisionWorker' | 'bootstrapWorker' | 'rowsWorker';

/** The compiled entry points, named as the build script writes them (server/scripts/build-server.mjs). */
export const WORKER_NAMES: WorkerName[] = ['uploadWorker', 'runWorker', 'precisionWorker', 'bootstrapWorker', 'rowsWorker'];

/** A thread running the named worker (server/src/workers/<name>.ts), with `data` in its workerData. */
export function startTsWorker(name: WorkerName, data: object = {}): Worker {
  // In the build every entry is one file in dist/server, so this file's URL is that folder.
  if (compiled) return new Worker(new URL(`./${name}.js`, import.meta.url), { workerData: data });
  const boot = new URL('./runWorkerBoot.mjs', import.meta.url);
  const tsconfig = fileURLToPath(new URL('../../../tsconfig.json', import.meta.url));
  return new Worker(boot, { workerData: { ...data, workerFile: new URL(`./${name}.ts`, import.meta.url).href, tsconfig } });
}
