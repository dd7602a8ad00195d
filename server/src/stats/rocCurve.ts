/**
 * ROC curve points for plotting: at each distinct threshold t (positive when p ≥ t), FPR = FP/n0, TPR = TP/n1,
 * from (0,0) to (1,1). Source: common practice, no source (Fawcett T (2006) Pattern Recognit Lett 27:861–874, algorithm 1).
 * Choice: downsampled to at most `maxPoints` points, evenly spaced in the index of distinct thresholds, keeping both
 * ends; the AUC is never computed from these points (see delongAuc.ts, which uses every row).
 */
import type { SortedCohort } from './sortedCohort';

export function rocCurve(s: SortedCohort, maxPoints = 200): { fpr: number[]; tpr: number[]; thresholds: number[] } {
  const total = s.groups + 1; // the corner (0,0) at threshold +∞, then one point per distinct p from the top
  const step = Math.max(1, (total - 1) / (maxPoints - 1));
  const keep = new Set<number>();
  for (let x = 0; x < total - 1; x += step) keep.add(Math.round(x));
  keep.add(total - 1);
  const fpr: number[] = [];
  const tpr: number[] = [];
  const thresholds: number[] = [];
  let tp = 0;
  let fp = 0;
  for (let j = 0; j < total; j++) {
    if (j > 0) {
      const k = s.groups - j;
      tp += s.groupEvents[k];
      fp += s.groupNonEvents[k];
    }
    if (keep.has(j)) {
      fpr.push(fp / s.nonEvents);
      tpr.push(tp / s.events);
      thresholds.push(j === 0 ? 1 : s.groupValue[s.groups - j]);
    }
  }
  return { fpr, tpr, thresholds };
}
