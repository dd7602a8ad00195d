/**
 * Every worker thread of the server, through piscina pools. One boot path: every pool's threads load the one task
 * module (jobs/threads/tasks.ts) and run a task by its name. From the sources a thread starts from boot.mjs, which registers
 * tsx and loads tasks.ts; in the production build it is the bundled dist/server/tasks.js next to the server's file.
 * Background threads lower their CPU priority with piscina's niceIncrement (PLUMBLINE_WORKER_NICE; on Linux the
 * nice value is per thread), so the API thread, which only answers requests, gets a core first.
 *
 * Pools, created on first use (importing this module starts nothing):
 *  - background: runs, drift series, reproductions, bootstrap ranges (at most one thread per core);
 *  - uploads: upload checks (PLUMBLINE_UPLOAD_THREADS, one thread kept warm);
 *  - requests: work a person waits for (a received file's screen, adequacy widths, recalibration), never queued
 *    behind a long run or check;
 *  - rows: the row browser, one long-lived thread whose kept sort orders serve every page request.
 */
import { availableParallelism } from 'node:os';
import { MessageChannel, receiveMessageOnPort, type MessagePort } from 'node:worker_threads';
import { Piscina } from 'piscina';
import type { AdequacyPrecision } from '@shared/adequacy';
import type { RunResults } from '@shared/runs';
import type { ValidationResult, ValidationSettings } from '@shared/validation';
import { compiled, config } from '../../platform/config';
import { DomainError } from '../../domain/errors';
import { logger } from '../../platform/observability/log';
import { cachePrecision } from '../../domain/runs/adequacyPrecision';
import type { DriftSeriesPart } from '../../domain/drift/driftSeries';
import { RunInputError, type ProgressFn } from '../../domain/runs/runCompute';
import { percentileIntervals, scalarMetrics } from '../../stats/bootstrap';
import type { ComparisonAnswer, ComparisonTask } from './comparisonWorker';
import type { RecalibrationAnswer, RecalibrationTask } from './recalibrationWorker';
import type { BrowsedRow, RowsRequest } from './rowsWorker';
import type { RunJob, RunTask, RunWorkerMessage } from './runWorker';
import type { TaskName, Tasks } from './tasks';
import type { ScreenAnswer, UploadWorkerData, UploadWorkerMessage } from './uploadWorker';

type PoolName = 'background' | 'uploads' | 'requests' | 'rows';

function options(name: PoolName): ConstructorParameters<typeof Piscina>[0] {
  const nice = config.workerNice;
  switch (name) {
    case 'background':
      return {
        minThreads: 0,
        maxThreads: Math.max(1, availableParallelism()),
        idleTimeout: 30_000,
        niceIncrement: nice,
      };
    case 'uploads':
      return { minThreads: 1, maxThreads: config.uploadThreads, idleTimeout: 60_000, niceIncrement: nice };
    case 'requests':
      return { minThreads: 0, maxThreads: 2, idleTimeout: 60_000, niceIncrement: nice };
    case 'rows':
      return { minThreads: 1, maxThreads: 1, niceIncrement: nice };
  }
}

const pools = new Map<PoolName, Piscina>();

function pool(name: PoolName): Piscina {
  let p = pools.get(name);
  if (!p) {
    const created = new Piscina({
      ...options(name),
      // From the sources boot.mjs registers tsx in the thread first; the build has the bundled module.
      filename: new URL(compiled ? './tasks.js' : './boot.mjs', import.meta.url).href,
      // Tasks wait on PostgreSQL and keep connections between tasks: an idle thread must keep its event loop turning.
      atomics: 'disabled',
    });
    // A thread that stops during a task rejects that task. Otherwise (a thread that cannot start, say) piscina would
    // start no other and leave waiting tasks waiting: the pool is ended, which rejects them, and the next task makes
    // a new one.
    created.on('error', (err: Error) => {
      logger.error({ err, pool: name }, 'a worker thread failed; its pool starts again');
      if (pools.get(name) === created) pools.delete(name);
      void created.destroy().catch(() => undefined);
    });
    pools.set(name, created);
    p = created;
  }
  return p;
}

/** Runs a task of jobs/threads/tasks.ts in the named pool. */
function task<K extends TaskName>(
  poolName: PoolName,
  name: K,
  input: Parameters<Tasks[K]>[0],
  options: { transferList?: MessagePort[]; signal?: AbortSignal } = {},
): Promise<Awaited<ReturnType<Tasks[K]>>> {
  return pool(poolName).run({ name, input }, options);
}

/** Ends every pool's threads (shutdown, tests); the next task starts a new pool. */
export async function stopPools(): Promise<void> {
  const all = [...pools.values()];
  pools.clear();
  await Promise.all(all.map((p) => p.destroy()));
}

/** A task's progress port: messages go to `on` while it runs; what is left is read before the result is used. */
function progressPort<M>(on: (m: M) => void): { port: MessagePort; done: () => void } {
  const { port1, port2 } = new MessageChannel();
  port1.on('message', on);
  return {
    port: port2,
    done: () => {
      for (let m = receiveMessageOnPort(port1); m; m = receiveMessageOnPort(port1)) on(m.message as M);
      port1.close();
    },
  };
}

// ---------------------------------------------------------------- runs

export interface ThreadOutcome {
  results: RunResults;
  inputsSha256: string;
  drift: DriftSeriesPart | null;
}

export interface RunningThread {
  result: Promise<ThreadOutcome>;
  /** Stops the computation (its thread ends); `result` then rejects. */
  terminate: () => Promise<void>;
}

type JobWithoutDb = RunJob extends infer J ? (J extends RunJob ? Omit<J, 'db'> : never) : never;

/** A run (or a drift series) in the background pool: the thread reads its own inputs; progress reaches onProgress. */
export function computeInThread(job: JobWithoutDb, onProgress: ProgressFn = () => {}): RunningThread {
  const stop = new AbortController();
  const progress = progressPort((m: Extract<RunWorkerMessage, { type: 'progress' }>) =>
    onProgress(m.fraction, m.message),
  );
  const running = task('background', 'run', { ...job, db: { ...config.db }, progress: progress.port } as RunTask, {
    transferList: [progress.port],
    signal: stop.signal,
  });
  const result = running.finally(progress.done).then((msg) => {
    if (msg.type === 'error') throw msg.inputError ? new RunInputError(msg.message) : new Error(msg.message);
    if (msg.precision) cachePrecision(msg.precision.n, msg.precision.events, msg.precision.auc, msg.precision.value);
    return { results: msg.results as RunResults, inputsSha256: msg.inputsSha256, drift: msg.drift };
  });
  return {
    result,
    terminate: async () => {
      stop.abort();
      await result.catch(() => undefined);
    },
  };
}

/** The bootstrap split into `workers` contiguous ranges of replicates, run in the background pool. Each replicate has
 * its own random stream (stats/bootstrap.ts), so the intervals equal the single-thread bootstrap for the same seed. */
export async function bootstrapInWorkers(
  p: Float64Array,
  y: Uint8Array,
  settings: ValidationSettings,
  point: ValidationResult,
  workers = Math.max(1, availableParallelism() - 1),
): Promise<NonNullable<ValidationResult['bootstrap']> & { workers: number }> {
  const R = settings.bootstrapReplicates;
  const k = Math.max(1, Math.min(workers, R));
  const ranges = Array.from({ length: k }, (_, i) => [Math.floor((i * R) / k), Math.floor(((i + 1) * R) / k)]);
  const parts = await Promise.all(
    ranges.map(([from, to]) => task('background', 'bootstrap', { p, y, settings, from, to })),
  );
  return { ...percentileIntervals(scalarMetrics(point), parts.flat(), settings.bootstrapSeed), workers: k };
}

/**
 * A score comparison (two score versions on one cohort version) in the background pool; the thread reads its inputs
 * and reports the share done to onProgress.
 */
export async function compareInThread(
  input: Omit<ComparisonTask, 'db' | 'progress'>,
  onProgress: (fraction: number) => void = () => {},
): Promise<ComparisonAnswer> {
  const progress = progressPort(onProgress);
  try {
    return await task(
      'background',
      'comparison',
      { ...input, db: { ...config.db }, progress: progress.port },
      { transferList: [progress.port] },
    );
  } finally {
    progress.done();
  }
}

// ---------------------------------------------------------------- uploads

type CheckEnding = Exclude<UploadWorkerMessage, { type: 'progress' }>;

/** Checks one upload in the uploads pool; resolves with how it ended (stored or rolled back by then). */
export async function checkInThread(
  data: UploadWorkerData,
  onProgress: (m: Extract<UploadWorkerMessage, { type: 'progress' }>) => void,
): Promise<CheckEnding> {
  const progress = progressPort(onProgress);
  try {
    return await task('uploads', 'checkUpload', { data, progress: progress.port }, { transferList: [progress.port] });
  } catch (err) {
    return { type: 'error', message: `the checking thread failed: ${(err as Error).message}` };
  } finally {
    progress.done();
  }
}

/** The first look at a received file (encoding, delimiter, header, sample, identifier screen), off the API thread. */
export async function screenInThread(
  path: string,
): Promise<ScreenAnswer | Extract<UploadWorkerMessage, { type: 'error' }>> {
  try {
    return await task('requests', 'screenFile', path);
  } catch (err) {
    return { type: 'error', message: `the screening thread failed: ${(err as Error).message}` };
  }
}

/** Starts the uploads pool (and its warm thread) ahead of the first upload, so its load is not paid while a steward waits. */
export function warmUploadThreads(): void {
  pool('uploads');
}

// ---------------------------------------------------------------- requests

/** The adequacy widths for (n, events, AUC), worked out in the requests pool. */
export function precisionInPool(n: number, events: number, auc: number | null): Promise<AdequacyPrecision> {
  return task('requests', 'precision', { n, events, auc });
}

/** Chosen cells of chosen lines of an upload's temp file (the rejected-rows CSV), read in the requests pool. */
export function cellsOnLinesInPool(input: Parameters<Tasks['cellsOnLines']>[0]): Promise<[number, string[]][]> {
  return task('requests', 'cellsOnLines', input);
}

/** A recalibration fit of a stored cohort version, made in the requests pool. */
export function recalibrateInPool(input: RecalibrationTask): Promise<RecalibrationAnswer> {
  return task('requests', 'recalibration', input);
}

/** One page of a cohort version's rows, from the row browser's thread. */
export async function browseRows(request: RowsRequest): Promise<{ rows: BrowsedRow[]; total: number }> {
  const a = await task('rows', 'rows', request);
  if (!a.ok) throw new DomainError('unavailable', `the rows could not be read: ${a.message}`);
  return { rows: a.rows, total: a.total };
}
