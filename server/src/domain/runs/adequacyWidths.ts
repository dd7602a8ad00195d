// Adequacy expected CI widths for the API thread (domain/runs/adequacy.ts): cached ones at once, new ones worked out in the requests
// pool (jobs/threads/pool.ts) and cached. A run's own expected CI widths already come from its run task; this is for the rest — a run
// page first opened after a restart, a cohort version page with an assumed or borrowed AUC. At start the expected CI widths of
// the newest completed runs are worked out too, before anyone asks.
// If the pool cannot run the task, the expected CI widths are computed here as before (slower for others, never wrong).
import type { AdequacyPrecision } from '@shared/adequacy';
import { dataSource } from '../../platform/database/dataSource';
import { ValidationRun } from '../../platform/database/entities/ValidationRun';
import { precisionInPool } from '../../jobs/threads/pool';
import { cachePrecision, cachedPrecision, precision, runPrecisionInputs } from './adequacyPrecision';
import { config } from '../../platform/config';
import { logger } from '../../platform/observability/log';

const inFlight = new Map<string, Promise<AdequacyPrecision>>();
const keyOf = (n: number, events: number, auc: number | null) => `${n}|${events}|${auc}`;

/** The expected CI widths for n patients with `events` events and this AUC: cached, or worked out off the API thread. */
export function precisionOffThread(n: number, events: number, auc: number | null): Promise<AdequacyPrecision> {
  const cached = events === 0 || events === n ? precision(n, events, auc) : cachedPrecision(n, events, auc);
  if (cached) return Promise.resolve(cached);
  const key = keyOf(n, events, auc);
  const pending = inFlight.get(key);
  if (pending) return pending;
  const promise = precisionInPool(n, events, auc).then(
    (value) => {
      cachePrecision(n, events, auc, value);
      return value;
    },
    (err: Error) => {
      logger.error({ err }, 'the widths task failed; widths are computed on the API thread');
      return precision(n, events, auc);
    },
  );
  inFlight.set(key, promise);
  const done = () => inFlight.delete(key);
  promise.then(done, done);
  return promise;
}

/** Works out (in the pool) the expected CI widths of the `limit` newest completed runs, one at a time; only counts and AUC are read. */
export async function warmRunCiWidths(limit: number, stopped: () => boolean = () => false): Promise<void> {
  const rows: { n: unknown; events: unknown; auc: unknown }[] = await dataSource
    .getRepository(ValidationRun)
    .createQueryBuilder('r')
    .select(`(r.results->'overall'->>'n')::int`, 'n')
    .addSelect(`(r.results->'overall'->>'events')::int`, 'events')
    .addSelect(
      `CASE WHEN jsonb_typeof(r.results->'overall'->'auc'->'estimate') = 'number' THEN (r.results->'overall'->'auc'->>'estimate')::float8 END`,
      'auc',
    )
    .where(`r.status = 'completed'`)
    .orderBy('r.finishedAt', 'DESC', 'NULLS LAST')
    .limit(limit)
    .getRawMany();
  for (const r of rows) {
    if (stopped()) return;
    const inputs = runPrecisionInputs({
      overall: { n: r.n, events: r.events, auc: { estimate: r.auc === null ? undefined : Number(r.auc) } },
    });
    if (inputs) await precisionOffThread(inputs.n, inputs.events, inputs.auc);
  }
}

// At start: the expected CI widths of the newest completed runs (PLUMBLINE_WARM_WIDTHS of them, default 50, at most 500; 0 = none,
// as in the tests, where every file starts the server).
export function startCiWidthsWarmUp(): () => void {
  const n = config.warmWidths;
  const limit = Number.isInteger(n) && n >= 0 ? Math.min(n, 500) : 50;
  let stopped = false;
  if (limit > 0) {
    warmRunCiWidths(limit, () => stopped).catch((err) =>
      logger.error({ err }, 'working out the widths of completed runs failed'),
    );
  }
  return () => {
    stopped = true;
  };
}
