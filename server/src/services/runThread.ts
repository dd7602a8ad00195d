// Starts the run worker thread (workers/tsWorker.ts starts TypeScript workers). The thread reads its own inputs from
// PostgreSQL (workers/runWorker.ts); this side only passes ids and settings and receives the outcome.
import type { RunResults } from '@shared/runs';
import { config } from '../config';
import type { RunJob, RunWorkerMessage } from '../workers/runWorker';
import { startTsWorker } from '../workers/tsWorker';
import { keepPrecision } from './adequacyPrecision';
import type { DriftSeriesPart } from './driftSeries';
import type { ProgressFn } from './runCompute';
import { RunInputError } from './runCompute';

export interface ThreadOutcome {
  results: RunResults;
  inputsSha256: string;
  drift: DriftSeriesPart | null;
}

export interface RunningThread {
  result: Promise<ThreadOutcome>;
  terminate: () => Promise<void>;
}

type JobWithoutDb = RunJob extends infer J ? (J extends RunJob ? Omit<J, 'db'> : never) : never;

export function computeInThread(job: JobWithoutDb, onProgress: ProgressFn = () => {}): RunningThread {
  const worker = startTsWorker('runWorker', { ...job, db: { ...config.db } });
  let settled = false;
  const result = new Promise<ThreadOutcome>((resolve, reject) => {
    worker.on('message', (msg: RunWorkerMessage) => {
      if (msg.type === 'progress') onProgress(msg.fraction, msg.message);
      else if (msg.type === 'done') {
        settled = true;
        if (msg.precision) keepPrecision(msg.precision.n, msg.precision.events, msg.precision.auc, msg.precision.value);
        resolve({ results: msg.results as RunResults, inputsSha256: msg.inputsSha256, drift: msg.drift });
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
