/**
 * Percentile bootstrap: draw n rows with replacement, recompute the full metric set, and take the 2.5th and 97.5th
 * percentiles (R's type 7 quantile) of each metric over the replicates.
 * Source: Efron B, Tibshirani RJ (1993) An Introduction to the Bootstrap, Chapman & Hall, §13.3.
 * Choices: replicate r draws from its own stream, mulberry32 seeded with splitmix32(seed ⊕ r·golden), so the result
 * is the same for the same seed however replicates are split across workers; a replicate whose resample cannot be
 * validated (e.g. no events) or whose fit fails counts as failed for that metric and is left out, with the count
 * reported. Pure: the thread pool that spreads it lives in server/src/jobs/threads/pool.ts.
 * The same replicate streams give the calibration curve's confidence band (calibrationBand: the loess curve of each
 * resample evaluated at the point curve's fixed grid, percentiles per grid point) and the paired comparison of two
 * scores (compareScores.ts: one resample of rows feeds both scores).
 */
import type { CalibrationBand, Estimate, ValidationResult, ValidationSettings } from '@shared/validation';
import { computeFullSet } from './fullSet';
import { ici } from './ici';
import { loessAt, loessCurve } from './loess';
import { quantileType7, sortCohort } from './sortedCohort';

function splitmix32(a: number): number {
  a = (a + 0x9e3779b9) | 0;
  let t = a ^ (a >>> 16);
  t = Math.imul(t, 0x21f0aaad);
  t ^= t >>> 15;
  t = Math.imul(t, 0x735a2d97);
  return (t ^ (t >>> 15)) >>> 0;
}

/** mulberry32: a small 32-bit generator, uniform on [0, 1). */
export function mulberry32(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) | 0;
    let t = Math.imul(a ^ (a >>> 15), 1 | a);
    t = (t + Math.imul(t ^ (t >>> 7), 61 | t)) ^ t;
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

export function replicateStream(seed: number, replicate: number): () => number {
  return mulberry32(splitmix32((seed ^ Math.imul(replicate + 1, 0x9e3779b1)) | 0));
}

/** The scalar metrics the bootstrap gives intervals for. NaN where a metric is not estimable. */
export function scalarMetrics(r: ValidationResult): Record<string, number> {
  const m: Record<string, number> = {
    auc: r.auc.estimate,
    logLoss: r.logLoss,
    brier: r.brier,
    scaledBrier: r.scaledBrier,
    calibrationIntercept: r.calibrationIntercept.converged ? r.calibrationIntercept.estimate : NaN,
    calibrationSlope: r.calibrationSlope.converged ? r.calibrationSlope.estimate : NaN,
    oe: r.oe.estimate,
    hosmerLemeshow: r.hosmerLemeshow.statistic,
    spiegelhalterZ: r.spiegelhalter.z,
    ici: r.ici,
    e50: r.e50,
    e90: r.e90,
    emax: r.emax,
  };
  for (const nb of r.netBenefit) {
    m[`netBenefit@${nb.threshold}`] = nb.model;
    m[`standardizedNetBenefit@${nb.threshold}`] = nb.standardized ?? nb.model / r.eventRate;
  }
  for (const t of r.thresholds) {
    m[`sensitivity@${t.threshold}`] = t.sensitivity.estimate;
    m[`specificity@${t.threshold}`] = t.specificity.estimate;
    m[`ppv@${t.threshold}`] = t.ppv.estimate;
    m[`npv@${t.threshold}`] = t.npv.estimate;
  }
  return m;
}

/** Row indices of bootstrap replicate r: n draws with replacement from its own seeded stream. */
export function resampleIndices(n: number, seed: number, replicate: number, into = new Uint32Array(n)): Uint32Array {
  const rand = replicateStream(seed, replicate);
  for (let i = 0; i < n; i++) into[i] = Math.floor(rand() * n);
  return into;
}

/** Metric values of replicates [from, to): one row of values per replicate, keyed like scalarMetrics. */
export function runReplicates(
  p: Float64Array,
  y: Uint8Array,
  settings: ValidationSettings,
  from: number,
  to: number,
  onReplicate?: (done: number) => void,
): Record<string, number>[] {
  const n = p.length;
  const bp = new Float64Array(n);
  const by = new Uint8Array(n);
  const rows: Record<string, number>[] = [];
  for (let r = from; r < to; r++) {
    const idx = resampleIndices(n, settings.bootstrapSeed, r);
    for (let i = 0; i < n; i++) {
      bp[i] = p[idx[i]];
      by[i] = y[idx[i]];
    }
    try {
      rows.push(scalarMetrics(computeFullSet(bp, by, { ...settings, bootstrapReplicates: 0 })));
    } catch {
      rows.push({}); // a resample the engine refuses (e.g. no events): every metric failed
    }
    onReplicate?.(r + 1);
  }
  return rows;
}

export function percentileIntervals(
  point: Record<string, number>,
  rows: Record<string, number>[],
  seed: number,
): NonNullable<ValidationResult['bootstrap']> {
  const intervals: Record<string, Estimate> = {};
  const failed: Record<string, number> = {};
  for (const key of Object.keys(point)) {
    const vals = rows.map((r) => r[key]).filter((v) => v !== undefined && Number.isFinite(v));
    const sorted = Float64Array.from(vals).sort();
    failed[key] = rows.length - vals.length;
    intervals[key] = sorted.length
      ? { estimate: point[key], lower: quantileType7(sorted, 0.025), upper: quantileType7(sorted, 0.975) }
      : { estimate: point[key], lower: NaN, upper: NaN };
  }
  return {
    replicates: rows.length,
    seed,
    intervals,
    failed,
    method: 'percentile (2.5th, 97.5th; type 7), resampling rows with replacement',
  };
}

/** In-process bootstrap (single thread); see bootstrapInWorkers (jobs/threads/pool.ts) for the same across worker threads. */
export function bootstrap(
  p: Float64Array,
  y: Uint8Array,
  settings: ValidationSettings,
  point: ValidationResult,
  onReplicate?: (done: number) => void,
): NonNullable<ValidationResult['bootstrap']> {
  return percentileIntervals(
    scalarMetrics(point),
    runReplicates(p, y, settings, 0, settings.bootstrapReplicates, onReplicate),
    settings.bootstrapSeed,
  );
}

/**
 * The ICI interval alone, for per-level figures: the same replicate streams, loess and ICI as the full bootstrap
 * (so the interval equals `bootstrap(...).intervals.ici`), without the other metrics — loess is most of the time, the
 * rest of the full set most of what is left. A resample without events or without non-events fails, as there.
 */
export function iciInterval(
  p: Float64Array,
  y: Uint8Array,
  settings: ValidationSettings,
  point: number,
): Estimate & { failed: number } {
  const n = p.length;
  const bp = new Float64Array(n);
  const by = new Uint8Array(n);
  const idx = new Uint32Array(n);
  const values: number[] = [];
  for (let r = 0; r < settings.bootstrapReplicates; r++) {
    resampleIndices(n, settings.bootstrapSeed, r, idx);
    let events = 0;
    for (let i = 0; i < n; i++) {
      bp[i] = p[idx[i]];
      by[i] = y[idx[i]];
      events += by[i];
    }
    if (events === 0 || events === n) continue;
    const s = sortCohort(bp, by);
    const v = ici(
      s,
      loessCurve(s, { span: settings.loessSpan, exactMaxN: settings.loessExactMaxN, gridSize: settings.loessGridSize })
        .atGroups,
    ).ici;
    if (Number.isFinite(v)) values.push(v);
  }
  const sorted = Float64Array.from(values).sort();
  const failed = settings.bootstrapReplicates - values.length;
  return sorted.length
    ? { estimate: point, lower: quantileType7(sorted, 0.025), upper: quantileType7(sorted, 0.975), failed }
    : { estimate: point, lower: NaN, upper: NaN, failed };
}

export type { CalibrationBand } from '@shared/validation';

/**
 * Pointwise 95% band of the loess calibration curve: each replicate's loess (same span) evaluated at the fixed grid
 * `grid` (the point curve's x values), percentiles 2.5 and 97.5 (type 7) per grid point. Pointwise, not simultaneous.
 */
export function calibrationBand(
  p: Float64Array,
  y: Uint8Array,
  grid: { p: number[]; observed: number[] },
  settings: Pick<ValidationSettings, 'bootstrapReplicates' | 'bootstrapSeed' | 'loessSpan'>,
): CalibrationBand {
  const n = p.length;
  const values = grid.p.map(() => new Float64Array(settings.bootstrapReplicates));
  const bp = new Float64Array(n);
  const by = new Uint8Array(n);
  const idx = new Uint32Array(n);
  for (let r = 0; r < settings.bootstrapReplicates; r++) {
    resampleIndices(n, settings.bootstrapSeed, r, idx);
    for (let i = 0; i < n; i++) {
      bp[i] = p[idx[i]];
      by[i] = y[idx[i]];
    }
    const s = sortCohort(bp, by);
    grid.p.forEach((x, k) => (values[k][r] = loessAt(s, x, settings.loessSpan)));
  }
  const sorted = values.map((v) => v.sort());
  return {
    p: grid.p,
    observed: grid.observed,
    lower: sorted.map((v) => quantileType7(v, 0.025)),
    upper: sorted.map((v) => quantileType7(v, 0.975)),
    replicates: settings.bootstrapReplicates,
    seed: settings.bootstrapSeed,
    method:
      'pointwise percentile bootstrap (2.5th, 97.5th; type 7) of the loess curve at the fixed grid of the point curve, rows resampled with replacement',
  };
}
