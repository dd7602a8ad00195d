// Adequacy widths for the API thread (services/adequacy.ts): kept ones at once, new ones worked out in one long-lived
// worker thread (workers/precisionWorker.ts) and kept. A run's own widths already come from its run thread; this is for
// the rest — a run page first opened after a restart, a cohort version page with an assumed or borrowed AUC. At
// start the thread also works out the widths of every completed run, newest first, before anyone asks.
// If the thread cannot start or stops, the widths are computed here as before (slower for others, never wrong).
import type { Worker } from 'node:worker_threads';
import type { AdequacyPrecision } from '@shared/adequacy';
import { dataSource } from '../db/dataSource';
import type { PrecisionAnswer, PrecisionJob } from '../workers/precisionWorker';
import { startTsWorker } from '../workers/tsWorker';
import { keepPrecision, keptPrecision, precision, runPrecisionInputs } from './adequacyPrecision';
import { config } from '../config';
import { logger } from '../observability/log';

let worker: Worker | null = null;
let broken = false;
let nextId = 1;
const waiting = new Map<number, { job: PrecisionJob; resolve: (v: AdequacyPrecision) => void }>();
const inFlight = new Map<string, Promise<AdequacyPrecision>>();

function settleInline(): void {
  for (const { job, resolve } of waiting.values()) resolve(precision(job.n, job.events, job.auc));
  waiting.clear();
}

function thread(): Worker | null {
  if (worker || broken) return worker;
  const w = startTsWorker('precisionWorker');
  w.on('message', (a: PrecisionAnswer) => {
    const entry = waiting.get(a.id);
    if (!entry) return;
    waiting.delete(a.id);
    const { n, events, auc } = entry.job;
    const value = 'value' in a ? a.value : precision(n, events, auc);
    keepPrecision(n, events, auc, value);
    entry.resolve(value);
    if (!waiting.size) w.unref(); // an idle thread never keeps the process alive
  });
  const lost = (why: string) => {
    if (worker !== w) return;
    logger.error({ why }, 'the widths thread stopped; widths are computed on the API thread');
    worker = null;
    broken = true;
    settleInline();
  };
  w.on('error', (err) => lost(err.message));
  w.on('exit', (code) => lost(`exit code ${code}`));
  w.unref();
  worker = w;
  return w;
}

const keyOf = (n: number, events: number, auc: number | null) => `${n}|${events}|${auc}`;

/** The widths for n patients with `events` events and this AUC: kept, or worked out off the API thread. */
export function precisionOffThread(n: number, events: number, auc: number | null): Promise<AdequacyPrecision> {
  const kept = events === 0 || events === n ? precision(n, events, auc) : keptPrecision(n, events, auc);
  if (kept) return Promise.resolve(kept);
  const key = keyOf(n, events, auc);
  const pending = inFlight.get(key);
  if (pending) return pending;
  const w = thread();
  if (!w) return Promise.resolve(precision(n, events, auc));
  const promise = new Promise<AdequacyPrecision>((resolve) => {
    const job = { id: nextId++, n, events, auc };
    waiting.set(job.id, { job, resolve });
    w.ref();
    w.postMessage(job);
  });
  inFlight.set(key, promise);
  const done = () => inFlight.delete(key);
  promise.then(done, done);
  return promise;
}

/** For tests: stops the thread (the next request starts another). */
export async function stopPrecisionThread(): Promise<void> {
  const w = worker;
  worker = null;
  broken = false;
  settleInline();
  await w?.terminate();
}

/** Works out (in the thread) the widths of the `limit` newest completed runs, one at a time; only counts and AUC are read. */
export async function warmRunWidths(limit: number, stopped: () => boolean = () => false): Promise<void> {
  const rows: { n: unknown; events: unknown; auc: unknown }[] = await dataSource.query(
    `SELECT (results->'overall'->>'n')::int AS n, (results->'overall'->>'events')::int AS events,
            CASE WHEN jsonb_typeof(results->'overall'->'auc'->'estimate') = 'number' THEN (results->'overall'->'auc'->>'estimate')::float8 END AS auc
       FROM validation_runs WHERE status = 'completed' ORDER BY finished_at DESC NULLS LAST LIMIT $1`,
    [limit],
  );
  for (const r of rows) {
    if (stopped()) return;
    const inputs = runPrecisionInputs({ overall: { n: r.n, events: r.events, auc: { estimate: r.auc === null ? undefined : Number(r.auc) } } });
    if (inputs) await precisionOffThread(inputs.n, inputs.events, inputs.auc);
  }
}

// At start: the widths of the newest completed runs (PLUMBLINE_WARM_WIDTHS of them, default 50, at most 500; 0 = none,
// as in the tests, where every file starts the server).
export function startWidthsWarmUp(): () => Promise<void> {
  const n = config.warmWidths;
  const limit = Number.isInteger(n) && n >= 0 ? Math.min(n, 500) : 50;
  let stopped = false;
  if (limit > 0) {
    warmRunWidths(limit, () => stopped).catch((err) => logger.error({ err }, 'working out the widths of completed runs failed'));
  }
  return async () => {
    stopped = true;
    await stopPrecisionThread();
  };
}
