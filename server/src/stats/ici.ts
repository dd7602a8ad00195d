/**
 * Integrated Calibration Index and its quantiles: d_i = |p_i − ŝ(p_i)| with ŝ the loess calibration curve;
 * ICI = mean d, E50 = median d, E90 = 90th percentile of d, Emax = max d.
 * Source: Austin PC, Steyerberg EW (2019) The Integrated Calibration Index (ICI) and related metrics for quantifying
 * the calibration of logistic regression models. Stat Med 38:4051–4065.
 * Choices: one d per row (tied rows count each time); percentiles by R's type 7 quantile (R's default, as in the
 * paper's code); the smoothed value is not clipped to [0, 1].
 */
import type { SortedCohort } from './sortedCohort';

export function ici(
  s: SortedCohort,
  smoothedAtGroups: Float64Array,
): { ici: number; e50: number; e90: number; emax: number } {
  const d = new Float64Array(s.n);
  let i = 0;
  let sum = 0;
  for (let k = 0; k < s.groups; k++) {
    const v = Math.abs(s.groupValue[k] - smoothedAtGroups[k]);
    const c = s.groupEvents[k] + s.groupNonEvents[k];
    for (let r = 0; r < c; r++) d[i++] = v;
    sum += v * c;
  }
  return { ici: sum / s.n, e50: selectQuantile7(d, 0.5), e90: selectQuantile7(d, 0.9), emax: selectQuantile7(d, 1) };
}

/** Type 7 quantile by selection (Hoare's quickselect, O(n)), reordering `a`; avoids a full sort of a million d. */
export function selectQuantile7(a: Float64Array, prob: number): number {
  const h = (a.length - 1) * prob;
  const lo = Math.floor(h);
  const vLo = select(a, lo, 0, a.length - 1);
  if (lo + 1 >= a.length || h === lo) return vLo;
  // after selection every element right of lo is ≥ a[lo]: the next order statistic is their minimum
  let vHi = Infinity;
  for (let i = lo + 1; i < a.length; i++) if (a[i] < vHi) vHi = a[i];
  return vLo + (h - lo) * (vHi - vLo);
}

function select(a: Float64Array, k: number, left: number, right: number): number {
  while (right > left) {
    // median of three as pivot; partition with equal keys spread to both sides (no quadratic case on ties)
    const mid = (left + right) >>> 1;
    const x = a[left],
      y = a[mid],
      z = a[right];
    const pivot = x < y ? (y < z ? y : x < z ? z : x) : x < z ? x : y < z ? z : y;
    let i = left;
    let j = right;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        const t = a[i];
        a[i] = a[j];
        a[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) right = j;
    else if (k >= i) left = i;
    else return a[k];
  }
  return a[k];
}
