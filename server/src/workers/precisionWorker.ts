// Worker thread for the adequacy widths (services/precisionThread.ts): precisionFor's bisection costs about 0.2 s of
// CPU for each new (n, events, AUC), which the API thread must not spend while others wait for their answers.
import { parentPort } from 'node:worker_threads';
import type { AdequacyPrecision } from '@shared/adequacy';
import { precision } from '../services/adequacyPrecision';
import { lowerThisThreadPriority } from './threadPriority';

export interface PrecisionJob { id: number; n: number; events: number; auc: number | null }
export type PrecisionAnswer = { id: number; value: AdequacyPrecision } | { id: number; error: string };

const port = parentPort;
if (port) {
  lowerThisThreadPriority();
  port.on('message', (job: PrecisionJob) => {
    let answer: PrecisionAnswer;
    try {
      answer = { id: job.id, value: precision(job.n, job.events, job.auc) };
    } catch (err) {
      answer = { id: job.id, error: (err as Error).message ?? String(err) };
    }
    port.postMessage(answer);
  });
}
