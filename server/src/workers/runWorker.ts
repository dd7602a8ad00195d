// Worker thread for one validation run: the CPU-heavy part runs here so the API's event loop stays free.
// Receives the run input as workerData and answers with progress messages and then the results (or an error).
import { parentPort, workerData } from 'node:worker_threads';
import type { AdequacyPrecision } from '@shared/adequacy';
import { precision, runPrecisionInputs } from '../services/adequacyPrecision';
import { computeRunResults, RunInputError, type RunComputeInput } from '../services/runCompute';
import { lowerThisThreadPriority } from './threadPriority';

export type RunWorkerMessage =
  | { type: 'progress'; fraction: number; message: string }
  | { type: 'done'; results: unknown; precision: { n: number; events: number; auc: number | null; value: AdequacyPrecision } | null }
  | { type: 'error'; message: string; inputError: boolean };

const port = parentPort;
if (port) {
  // A run may compute for minutes: it yields the CPU to the API thread (per-thread nice value, see threadPriority.ts).
  lowerThisThreadPriority();
  try {
    const results = computeRunResults(workerData as RunComputeInput, (fraction, message) => port.postMessage({ type: 'progress', fraction, message } satisfies RunWorkerMessage));
    // The run page's expected CI widths (adequacy) are worked out here too, not on the API thread when it is opened.
    const inputs = runPrecisionInputs(results as Parameters<typeof runPrecisionInputs>[0]);
    const widths = inputs && { ...inputs, value: precision(inputs.n, inputs.events, inputs.auc) };
    port.postMessage({ type: 'done', results, precision: widths } satisfies RunWorkerMessage);
  } catch (err) {
    port.postMessage({ type: 'error', message: (err as Error).message ?? String(err), inputError: err instanceof RunInputError } satisfies RunWorkerMessage);
  }
}
