// The expected CI widths of the adequacy block (domain/runs/adequacy.ts), cached per (n, events, AUC). precisionFor solves
// the anticipated LP distribution by bisection (about 0.2 s of CPU): a run's expected CI widths are worked out in its own thread
// when it completes (jobs/threads/runWorker.ts) and cached here, so opening the run page does not pay them on the API thread.
// Any other expected CI widths are worked out in the requests pool (domain/runs/adequacyWidths.ts). No database access here: the
// worker threads import this module.
import type { AdequacyPrecision } from '@shared/adequacy';
import { precisionFor } from '../../stats/sampleSize';

const MEMO_SIZE = 500;
const memo = new Map<string, AdequacyPrecision>();
/** How many expected CI widths this thread has worked out itself (not cached, not received): the API thread's should stay at 0. */
let computedHere = 0;
const keyOf = (n: number, events: number, auc: number | null) => `${n}|${events}|${auc}`;
const fin = (v: number | null) => (v !== null && Number.isFinite(v) ? v : null);

function keep(key: string, value: AdequacyPrecision) {
  if (memo.size >= MEMO_SIZE) memo.delete(memo.keys().next().value as string);
  memo.set(key, value);
}

/** The expected CI widths for n patients with `events` events and this AUC (null: not available), computed once per key. */
export function precision(n: number, events: number, auc: number | null): AdequacyPrecision {
  if (events === 0 || events === n)
    return { oe: null, auc: null, slope: null, note: 'no precision can be given without both events and non-events' };
  const key = keyOf(n, events, auc);
  const hit = memo.get(key);
  if (hit) return hit;
  computedHere++;
  const eventRate = events / n;
  let out: AdequacyPrecision;
  if (auc === null || !(auc > 0 && auc < 1)) {
    const p = precisionFor(n, eventRate, 0.75); // O/E's expected CI width does not depend on the AUC
    out = { oe: fin(p.oe), auc: null, slope: null, note: 'the AUC is not available, so only the O/E width is given' };
  } else {
    const p = precisionFor(n, eventRate, auc);
    out = {
      oe: fin(p.oe),
      auc: fin(p.auc),
      slope: fin(p.slope),
      note: p.slope === null ? 'the calibration slope width needs an AUC above 0.5' : null,
    };
  }
  keep(key, out);
  return out;
}

/** Caches expected CI widths computed elsewhere (the run thread) for the same inputs. */
export function cachePrecision(n: number, events: number, auc: number | null, value: AdequacyPrecision): void {
  keep(keyOf(n, events, auc), value);
}

/** What a completed run's adequacy is computed from: its own counts and AUC (null when the results lack them). */
export function runPrecisionInputs(
  results: { overall?: { n?: unknown; events?: unknown; auc?: { estimate?: unknown } } } | null | undefined,
): { n: number; events: number; auc: number | null } | null {
  const o = results?.overall;
  if (!o || !Number.isInteger(o.n) || !Number.isInteger(o.events)) return null;
  const auc = typeof o.auc?.estimate === 'number' && Number.isFinite(o.auc.estimate) ? o.auc.estimate : null;
  return { n: o.n as number, events: o.events as number, auc };
}

/** The expected CI widths cached for these inputs, if any (without computing them). */
export function cachedPrecision(n: number, events: number, auc: number | null): AdequacyPrecision | undefined {
  return memo.get(keyOf(n, events, auc));
}

export function ciWidthsComputedHere(): number {
  return computedHere;
}

/** For tests: forgets every cached expected CI width (as a restart does). */
export function forgetCachedPrecision(): void {
  memo.clear();
}
