/**
 * AUC (c-statistic) with the DeLong standard error and Wald 95% CI.
 *   AUC = mean over events of V10, V10(i) = [#{non-events below p_i} + ½ #{non-events tied}] / n0;
 *   V01(j) = [#{events above p_j} + ½ #{events tied}] / n1;  Var = s²(V10)/n1 + s²(V01)/n0.
 * Sources: DeLong ER, DeLong DM, Clarke-Pearson DL (1988) Biometrics 44:837–845; computed from mid-ranks in
 * O(n log n) as in Sun X, Xu W (2014) IEEE Signal Processing Letters 21:1389–1393 (here from the shared sort).
 * Choices: direction fixed (higher p = higher risk; no automatic flip); ties count one half; CI = AUC ± 1.96·SE,
 * not truncated to [0, 1] (pROC truncates; we report a warning instead when it crosses). SE needs at least two events
 * and two non-events, otherwise it is NaN and the caller warns.
 */
import { normalTwoSided, Z975 } from './distributions';
import type { SortedCohort } from './sortedCohort';
import { sortCohort } from './sortedCohort';

export interface AucResult {
  estimate: number;
  se: number;
  lower: number;
  upper: number;
}

export function delongAuc(s: SortedCohort): AucResult {
  const { groupEvents: ge, groupNonEvents: gn, groups, events: n1, nonEvents: n0 } = s;
  // first pass: the means
  let below = 0;
  let sumV10 = 0;
  for (let k = 0; k < groups; k++) {
    sumV10 += ge[k] * ((below + 0.5 * gn[k]) / n0);
    below += gn[k];
  }
  const auc = sumV10 / n1;
  // mean V01 equals the AUC too; second pass: the variances by deviations (no cancellation)
  let ss10 = 0;
  let ss01 = 0;
  below = 0;
  let above = n1;
  for (let k = 0; k < groups; k++) {
    above -= ge[k];
    const v10 = (below + 0.5 * gn[k]) / n0 - auc;
    const v01 = (above + 0.5 * ge[k]) / n1 - auc;
    ss10 += ge[k] * v10 * v10;
    ss01 += gn[k] * v01 * v01;
    below += gn[k];
  }
  const se = n1 >= 2 && n0 >= 2 ? Math.sqrt(ss10 / (n1 - 1) / n1 + ss01 / (n0 - 1) / n0) : NaN;
  return { estimate: auc, se, lower: auc - Z975 * se, upper: auc + Z975 * se };
}

/** Per-subject DeLong components for a paired comparison: V10 for events, V01 for non-events, in input order. */
function components(p: Float64Array, y: Uint8Array): { auc: number; v10: Float64Array; v01: Float64Array } {
  const s = sortCohort(p, y);
  const v10: number[] = [];
  const v01: number[] = [];
  // value → V for each group, then look each subject up by binary search on the group values
  const gv10 = new Float64Array(s.groups);
  const gv01 = new Float64Array(s.groups);
  let below = 0;
  let above = s.events;
  for (let k = 0; k < s.groups; k++) {
    above -= s.groupEvents[k];
    gv10[k] = (below + 0.5 * s.groupNonEvents[k]) / s.nonEvents;
    gv01[k] = (above + 0.5 * s.groupEvents[k]) / s.events;
    below += s.groupNonEvents[k];
  }
  const find = (x: number) => {
    let lo = 0;
    let hi = s.groups - 1;
    while (lo < hi) {
      const mid = (lo + hi) >>> 1;
      if (s.groupValue[mid] < x) lo = mid + 1;
      else hi = mid;
    }
    return lo;
  };
  let sum = 0;
  for (let i = 0; i < p.length; i++) {
    const k = find(p[i]);
    if (y[i] === 1) {
      v10.push(gv10[k]);
      sum += gv10[k];
    } else v01.push(gv01[k]);
  }
  return { auc: sum / s.events, v10: Float64Array.from(v10), v01: Float64Array.from(v01) };
}

function covariance(a: Float64Array, b: Float64Array, ma: number, mb: number): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += (a[i] - ma) * (b[i] - mb);
  return s / (a.length - 1);
}

/**
 * Paired DeLong test of two AUCs on the same subjects (DeLong et al. 1988, §3):
 * z = (A1 − A2) / sqrt(Var A1 + Var A2 − 2 Cov), two-sided p.
 */
export function compareAucs(
  p1: Float64Array,
  p2: Float64Array,
  y: Uint8Array,
): { difference: number; se: number; z: number; pValue: number; auc1: number; auc2: number } {
  const a = components(p1, y);
  const b = components(p2, y);
  const n1 = a.v10.length;
  const n0 = a.v01.length;
  const s10 = [
    covariance(a.v10, a.v10, a.auc, a.auc),
    covariance(b.v10, b.v10, b.auc, b.auc),
    covariance(a.v10, b.v10, a.auc, b.auc),
  ];
  const s01 = [
    covariance(a.v01, a.v01, a.auc, a.auc),
    covariance(b.v01, b.v01, b.auc, b.auc),
    covariance(a.v01, b.v01, a.auc, b.auc),
  ];
  const variance = s10[0] / n1 + s01[0] / n0 + s10[1] / n1 + s01[1] / n0 - 2 * (s10[2] / n1 + s01[2] / n0);
  const se = Math.sqrt(variance);
  const z = (a.auc - b.auc) / se;
  return { difference: a.auc - b.auc, se, z, pValue: normalTwoSided(z), auc1: a.auc, auc2: b.auc };
}
