/**
 * Percentile bootstrap: draw n rows with replacement, recompute the full metric set, and take the 2.5th and 97.5th
 * percentiles (R's type 7 quantile) of each metric over the replicates.
 * Source: Efron B, Tibshirani RJ (1993) An Introduction to the Bootstrap, Chapman & Hall, §13.3.
 * Choices: replicate r draws from its own stream, mulberry32 seeded with splitmix32(seed ⊕ r·golden), so the result
 * is the same for the same seed however replicates are split across workers; a replicate whose resample cannot be
 * validated (e.g. no events) or whose fit fails counts as failed for that metric and is left out, with the count
 * reported. Pure: the thread pool that spreads it lives in server/src/jobs/threads/pool.ts.
 */
import type { Estimate, ValidationResult, ValidationSettings } from '@shared/validation';
import { computeFullSet } from './fullSet';
import { quantileType7 } from './sortedCohort';

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
  for (const nb of r.netBenefit) m[`netBenefit@${nb.threshold}`] = nb.model;
  for (const t of r.thresholds) {
    m[`sensitivity@${t.threshold}`] = t.sensitivity.estimate;
    m[`specificity@${t.threshold}`] = t.specificity.estimate;
    m[`ppv@${t.threshold}`] = t.ppv.estimate;
    m[`npv@${t.threshold}`] = t.npv.estimate;
  }
  return m;
}

/** Metric values of replicates [from, to): one row of values per replicate, keyed like scalarMetrics. */
export function runReplicates(p: Float64Array, y: Uint8Array, settings: ValidationSettings, from: number, to: number, onReplicate?: (done: number) => void): Record<string, number>[] {
  const n = p.length;
  const bp = new Float64Array(n);
  const by = new Uint8Array(n);
  const rows: Record<string, number>[] = [];
  for (let r = from; r < to; r++) {
    const rand = replicateStream(settings.bootstrapSeed, r);
    for (let i = 0; i < n; i++) {
      const j = Math.floor(rand() * n);
      bp[i] = p[j];
      by[i] = y[j];
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

export function percentileIntervals(point: Record<string, number>, rows: Record<string, number>[], seed: number): NonNullable<ValidationResult['bootstrap']> {
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
  return { replicates: rows.length, seed, intervals, failed, method: 'percentile (2.5th, 97.5th; type 7), resampling rows with replacement' };
}

/** In-process bootstrap (single thread); see bootstrapInWorkers (workers/pool.ts) for the same across worker threads. */
export function bootstrap(p: Float64Array, y: Uint8Array, settings: ValidationSettings, point: ValidationResult, onReplicate?: (done: number) => void): NonNullable<ValidationResult['bootstrap']> {
  return percentileIntervals(scalarMetrics(point), runReplicates(p, y, settings, 0, settings.bootstrapReplicates, onReplicate), settings.bootstrapSeed);
}
