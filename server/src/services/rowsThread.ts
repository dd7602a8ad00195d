// The cohort row browser's thread (workers/rowsWorker.ts): started on the first row request, kept while the process
// runs (an idle thread does not keep the process alive), started again if it stops.
import type { Worker } from 'node:worker_threads';
import { config } from '../config';
import { HttpError } from '../middleware/errors';
import type { BrowsedRow, RowsAnswer, RowsRequest } from '../workers/rowsWorker';
import { startTsWorker } from '../workers/tsWorker';

let worker: Worker | null = null;
let nextId = 1;
const waiting = new Map<number, { resolve: (a: { rows: BrowsedRow[]; total: number }) => void; reject: (e: Error) => void }>();

function thread(): Worker {
  if (worker) return worker;
  const w = startTsWorker('rowsWorker', { db: { ...config.db } });
  w.unref();
  w.on('message', (a: RowsAnswer) => {
    const pending = waiting.get(a.requestId);
    waiting.delete(a.requestId);
    if (!pending) return;
    if (a.ok) pending.resolve({ rows: a.rows, total: a.total });
    else pending.reject(new HttpError(503, `the rows could not be read: ${a.message}`));
  });
  const lost = (why: string) => {
    if (worker !== w) return;
    worker = null;
    for (const [, p] of waiting) p.reject(new Error(`the row browser thread stopped (${why})`));
    waiting.clear();
  };
  w.on('error', (err) => lost(err.message));
  w.on('exit', (code) => lost(`exit code ${code}`));
  worker = w;
  return w;
}

export function browseRows(request: Omit<RowsRequest, 'requestId'>): Promise<{ rows: BrowsedRow[]; total: number }> {
  const requestId = nextId++;
  const w = thread();
  return new Promise((resolve, reject) => {
    waiting.set(requestId, { resolve, reject });
    if (waiting.size === 1) w.ref(); // an answer is awaited
    w.postMessage({ ...request, requestId } satisfies RowsRequest);
  }).finally(() => {
    if (waiting.size === 0) worker?.unref();
  }) as Promise<{ rows: BrowsedRow[]; total: number }>;
}

/** Stops the thread (tests, shutdown). */
export async function stopRowsThread(): Promise<void> {
  const w = worker;
  worker = null;
  if (w) await w.terminate();
}
