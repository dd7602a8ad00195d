// Starts a worker thread on a TypeScript file. The source runs as TypeScript (tsx in the server, Vite in the tests), so
// the thread starts from a small .mjs file (runWorkerBoot.mjs) that registers tsx inside the thread with the project's
// tsconfig and then imports the .ts worker. (`execArgv: ['--import', 'tsx']` does not reach a worker's entry module on
// Node 20.)
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';

const BOOT = new URL('./runWorkerBoot.mjs', import.meta.url);
const TSCONFIG = fileURLToPath(new URL('../../../tsconfig.json', import.meta.url));

/** A thread running `workerFile` (a URL of a .ts file under server/src/workers), with `data` in its workerData. */
export function startTsWorker(workerFile: URL, data: object = {}): Worker {
  return new Worker(BOOT, { workerData: { ...data, workerFile: workerFile.href, tsconfig: TSCONFIG } });
}
