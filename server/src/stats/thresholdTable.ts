/**
 * Classification at risk thresholds: positive when p ≥ t; TP, FP, TN, FN; sensitivity TP/(TP+FN), specificity
 * TN/(TN+FP), PPV TP/(TP+FP), NPV TN/(TN+FN), each with a Wilson 95% CI (wilson.ts).
 * Source: common practice, no source (Altman DG, Bland JM (1994) BMJ 308:1552 for the definitions).
 * Choice: "≥ t" so a threshold equal to a predicted risk counts that row as positive; an undefined proportion (no
 * row in its denominator) is NaN and the engine warns.
 */
import type { ThresholdRow } from '@shared/validation';
import { lowerBound, type SortedCohort } from './sortedCohort';
import { wilson } from './wilson';

export function confusionAt(s: SortedCohort, t: number): { tp: number; fp: number; tn: number; fn: number } {
  // rows with p ≥ t are the tails of the per-class sorted arrays
  const fn = lowerBound(s.eventP, t);
  const tn = lowerBound(s.nonEventP, t);
  return { tp: s.events - fn, fp: s.nonEvents - tn, tn, fn };
}

export function thresholdTable(s: SortedCohort, thresholds: number[]): ThresholdRow[] {
  return thresholds.map((threshold) => {
    const { tp, fp, tn, fn } = confusionAt(s, threshold);
    return {
      threshold,
      tp,
      fp,
      tn,
      fn,
      sensitivity: wilson(tp, tp + fn),
      specificity: wilson(tn, tn + fp),
      ppv: wilson(tp, tp + fp),
      npv: wilson(tn, tn + fn),
    };
  });
}
