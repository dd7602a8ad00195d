/**
 * Net benefit at threshold pt: NB = TP/n − FP/n · pt/(1 − pt); treat-all NB = ȳ − (1 − ȳ) · pt/(1 − pt); treat-none 0.
 * Source: Vickers AJ, Elkin EB (2006) Decision curve analysis. Med Decis Making 26:565–574.
 * Standardised net benefit = NB / prevalence, the share of the most a perfect score could give (1 = every event
 * treated and no one else): Kerr KF, Brown MD, Zhu K, Janes H (2016) Assessing the clinical impact of risk prediction
 * models with decision curves: guidance for correct interpretation and appropriate use. J Clin Oncol 34:2534–2540.
 * Choice: a row is "treated" when p ≥ pt (counts from thresholdTable.ts, so the table and the curve agree).
 */
import type { NetBenefitRow } from '@shared/validation';
import { confusionAt } from './thresholdTable';
import type { SortedCohort } from './sortedCohort';

export function netBenefit(s: SortedCohort, thresholds: number[]): NetBenefitRow[] {
  const rate = s.events / s.n;
  return thresholds.map((t) => {
    const { tp, fp } = confusionAt(s, t);
    const odds = t / (1 - t);
    const model = tp / s.n - (fp / s.n) * odds;
    return { threshold: t, model, treatAll: rate - (1 - rate) * odds, treatNone: 0, standardized: model / rate };
  });
}
