// Starts the run worker thread. The source runs as TypeScript (tsx in the server, Vite in the tests), so the thread
// starts from a small .mjs file that registers tsx inside the thread and then imports the .ts worker.
// (`execArgv: ['--import', 'tsx']` does not reach a worker's entry module on Node 20.)
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { RunResults } from '@shared/runs';
import type { RunWorkerMessage } from '../workers/runWorker';
import type { ProgressFn, RunComputeInput } from './runCompute';
import { keepPrecision } from './adequacyPrecision';
import { RunInputError } from './runCompute';

export interface RunningThread {
  result: Promise<RunResults>;
  terminate: () => Promise<void>;
}

export function computeInThread(input: RunComputeInput, onProgress: ProgressFn = () => {}): RunningThread {
  const worker = new Worker(new URL('../workers/runWorkerBoot.mjs', import.meta.url), {
    workerData: {
      ...input,
      workerFile: new URL('../workers/runWorker.ts', import.meta.url).href,
      tsconfig: fileURLToPath(new URL('../../../tsconfig.json', import.meta.url)),
    },
  });
  let settled = false;
  const result = new Promise<RunResults>((resolve, reject) => {
    worker.on('message', (msg: RunWorkerMessage) => {
      if (msg.type === 'progress') onProgress(msg.fraction, msg.message);
      else if (msg.type === 'done') {
        settled = true;
        if (msg.precision) keepPrecision(msg.precision.n, msg.precision.events, msg.precision.auc, msg.precision.value);
        resolve(msg.results as RunResults);
        void worker.terminate();
      } else {
        settled = true;
        reject(msg.inputError ? new RunInputError(msg.message) : new Error(msg.message));
        void worker.terminate();
      }
    });
    worker.on('error', (err) => {
      settled = true;
      reject(err);
    });
    worker.on('exit', (code) => {
      if (!settled) reject(new Error(`the run worker stopped (exit code ${code}) before it finished`));
    });
  });
  return {
    result,
    terminate: async () => {
      await worker.terminate();
    },
  };
}
