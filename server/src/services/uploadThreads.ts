// A few long-lived threads for upload checks (server/src/workers/uploadWorker.ts). Starting a thread costs a
// TypeScript load of its modules (most of a second on a busy machine), so threads are kept and given one job at a
// time; further uploads wait in line (a screen of a newly received file goes first). PLUMBLINE_UPLOAD_THREADS sets
// how many (default 2, the cores of the machine we measured on; each also holds a PostgreSQL connection while it works).
import type { Worker } from 'node:worker_threads';
import type { ScreenAnswer, ScreenJob, UploadWorkerData, UploadWorkerMessage } from '../workers/uploadWorker';
import { startTsWorker } from '../workers/tsWorker';
import { config } from '../config';

type Ending = Exclude<UploadWorkerMessage, { type: 'progress' }> | ScreenAnswer;
interface Job {
  jobId: number;
  data: UploadWorkerData | ScreenJob;
  onProgress: (m: Extract<UploadWorkerMessage, { type: 'progress' }>) => void;
  resolve: (m: Ending) => void;
}

const size = config.uploadThreads;
const idle: Worker[] = [];
const busy = new Map<Worker, Job>();
const queue: Job[] = [];
let started = 0;
let nextJobId = 1;

function spawn(): Worker {
  started++;
  const worker = startTsWorker('uploadWorker');
  worker.on('message', ({ jobId, message }: { jobId: number; message: UploadWorkerMessage | ScreenAnswer }) => {
    const job = busy.get(worker);
    if (!job || job.jobId !== jobId) return;
    if (message.type === 'progress') { job.onProgress(message); return; }
    busy.delete(worker);
    job.resolve(message);
    release(worker);
  });
  let gone = false;
  const lost = (why: string) => {
    if (gone) return;
    gone = true;
    const job = busy.get(worker);
    busy.delete(worker);
    const i = idle.indexOf(worker);
    if (i >= 0) idle.splice(i, 1);
    started--;
    job?.resolve({ type: 'error', message: why });
    pump();
  };
  worker.on('error', (err) => lost(`the checking thread failed: ${err.message}`));
  worker.on('exit', (code) => lost(`the checking thread stopped (exit code ${code})`));
  return worker;
}

function release(worker: Worker) {
  idle.push(worker);
  worker.unref(); // an idle thread never keeps the process alive
  pump();
}

function pump() {
  while (queue.length) {
    // A screen is short and a steward waits for its answer: it goes first and may use one thread beyond the size.
    const screenAt = queue.findIndex((j) => 'kind' in j.data);
    const at = screenAt >= 0 ? screenAt : 0;
    const worker = idle.pop() ?? (started < size + (screenAt >= 0 ? 1 : 0) ? spawn() : undefined);
    if (!worker) return;
    const [job] = queue.splice(at, 1);
    worker.ref();
    busy.set(worker, job);
    worker.postMessage({ jobId: job.jobId, data: job.data });
  }
}

/** Checks one upload in a thread; resolves with how it ended (the thread has stored or rolled back by then). */
export function checkInThread(data: UploadWorkerData, onProgress: Job['onProgress']): Promise<Exclude<UploadWorkerMessage, { type: 'progress' }>> {
  return new Promise((resolve) => {
    queue.push({ jobId: nextJobId++, data, onProgress, resolve: resolve as Job['resolve'] });
    pump();
  });
}

/** The first look at a received file (encoding, delimiter, header, sample, identifier screen) in a thread. */
export function screenInThread(path: string): Promise<ScreenAnswer | Extract<UploadWorkerMessage, { type: 'error' }>> {
  return new Promise((resolve) => {
    queue.push({ jobId: nextJobId++, data: { kind: 'screen', path }, onProgress: () => {}, resolve: resolve as Job['resolve'] });
    pump();
  });
}

/** Starts one thread ahead of the first upload, so its TypeScript load is not paid while a steward waits. */
export function warmUploadThreads(): void {
  if (started > 0) return;
  const worker = spawn();
  release(worker);
}

/** For tests and shutdown: ends the idle threads. */
export async function stopUploadThreads(): Promise<void> {
  await Promise.all(idle.splice(0).map((w) => w.terminate()));
}
