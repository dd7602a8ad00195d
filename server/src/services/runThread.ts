// Starts the run worker thread (workers/tsWorker.ts starts TypeScript workers).
import type { RunResults } from '@shared/runs';
import type { RunWorkerMessage } from '../workers/runWorker';
import { startTsWorker } from '../workers/tsWorker';
import type { ProgressFn, RunComputeInput } from './runCompute';
import { keepPrecision } from './adequacyPrecision';
import { RunInputError } from './runCompute';

export interface RunningThread {
  result: Promise<RunResults>;
  terminate: () => Promise<void>;
}

export function computeInThread(input: RunComputeInput, onProgress: ProgressFn = () => {}): RunningThread {
  const worker = startTsWorker('runWorker', input);
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
