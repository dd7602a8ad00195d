/**
 * Two scores on the same patients, head to head.
 *   AUC: paired DeLong test of A1 − A2 (delongAuc.ts: DeLong ER et al. 1988, Biometrics 44:837–845), with the Wald
 *   95% CI of the difference, (A1 − A2) ± 1.96·SE — as pROC::roc.test(paired = TRUE, method = "delong") gives it.
 *   Net benefit: NB1(t) − NB2(t) at each threshold (Vickers AJ, Elkin EB 2006, Med Decis Making 26:565–574), with a
 *   paired percentile bootstrap CI: each replicate resamples rows once and both scores are scored on that resample,
 *   so the correlation between the scores is kept (Efron & Tibshirani 1993, §13.3; streams from bootstrap.ts).
 * Choice: a row is treated when its risk ≥ t, as in netBenefit.ts.
 */
import type { Estimate } from '@shared/validation';
import { resampleIndices } from './bootstrap';
import { compareAucs } from './delongAuc';
import { Z975 } from './distributions';
import { quantileType7 } from './sortedCohort';

export interface NetBenefitDifference {
  threshold: number;
  first: number;
  second: number;
  difference: Estimate;
}

export interface ScoreComparison {
  n: number;
  events: number;
  auc: { first: number; second: number; difference: Estimate; se: number; z: number; pValue: number; method: string };
  netBenefit: NetBenefitDifference[];
  bootstrap: { replicates: number; seed: number; method: string } | null;
}

/** Net benefit of risks `p` at each threshold, over the rows listed in `idx` (all rows when idx is null). */
export function netBenefitAt(
  p: Float64Array,
  y: Uint8Array,
  thresholds: number[],
  idx: Uint32Array | null = null,
): number[] {
  const n = idx ? idx.length : p.length;
  const tp = new Float64Array(thresholds.length);
  const fp = new Float64Array(thresholds.length);
  for (let k = 0; k < n; k++) {
    const i = idx ? idx[k] : k;
    for (let j = 0; j < thresholds.length; j++) {
      if (p[i] >= thresholds[j]) {
        if (y[i] === 1) tp[j]++;
        else fp[j]++;
      }
    }
  }
  return thresholds.map((t, j) => tp[j] / n - (fp[j] / n) * (t / (1 - t)));
}

export function compareScores(
  p1: Float64Array,
  p2: Float64Array,
  y: Uint8Array,
  opts: {
    thresholds: number[];
    replicates?: number;
    seed?: number;
    /** Called after each bootstrap replicate (progress for a caller that reports it). */
    onReplicate?: (done: number, total: number) => void;
  },
): ScoreComparison {
  const n = y.length;
  if (p1.length !== n || p2.length !== n) throw new RangeError('both scores need a risk for every row');
  for (const t of opts.thresholds)
    if (!(t > 0 && t < 1)) throw new RangeError(`threshold ${t} must lie strictly between 0 and 1`);
  const replicates = opts.replicates ?? 0;
  const seed = opts.seed ?? 20260101;
  let events = 0;
  for (let i = 0; i < n; i++) events += y[i];
  const a = compareAucs(p1, p2, y);
  const nb1 = netBenefitAt(p1, y, opts.thresholds);
  const nb2 = netBenefitAt(p2, y, opts.thresholds);
  const diffs = opts.thresholds.map(() => new Float64Array(replicates));
  const idx = new Uint32Array(n);
  for (let r = 0; r < replicates; r++) {
    resampleIndices(n, seed, r, idx);
    const b1 = netBenefitAt(p1, y, opts.thresholds, idx);
    const b2 = netBenefitAt(p2, y, opts.thresholds, idx);
    for (let j = 0; j < opts.thresholds.length; j++) diffs[j][r] = b1[j] - b2[j];
    opts.onReplicate?.(r + 1, replicates);
  }
  return {
    n,
    events,
    auc: {
      first: a.auc1,
      second: a.auc2,
      difference: { estimate: a.difference, lower: a.difference - Z975 * a.se, upper: a.difference + Z975 * a.se },
      se: a.se,
      z: a.z,
      pValue: a.pValue,
      method: 'paired DeLong test (DeLong et al. 1988), Wald 95% CI of the difference',
    },
    netBenefit: opts.thresholds.map((t, j) => {
      const sorted = diffs[j].sort();
      return {
        threshold: t,
        first: nb1[j],
        second: nb2[j],
        difference: {
          estimate: nb1[j] - nb2[j],
          lower: replicates ? quantileType7(sorted, 0.025) : NaN,
          upper: replicates ? quantileType7(sorted, 0.975) : NaN,
        },
      };
    }),
    bootstrap: replicates
      ? {
          replicates,
          seed,
          method:
            'paired percentile bootstrap (2.5th, 97.5th; type 7): rows resampled once per replicate for both scores',
        }
      : null,
  };
}
