/**
 * Grouped calibration curve: for each group of predicted risk (default deciles), mean predicted risk and observed
 * proportion with a Wilson 95% CI. Source: common practice, no source (Steyerberg EW (2019) Clinical Prediction
 * Models, 2nd ed., §15.3 [mem]). Choice: the same groups as Hosmer–Lemeshow (riskGroups.ts), so the plot and the
 * statistic describe the same groups.
 */
import type { CalibrationGroup } from '@shared/validation';
import { riskGroups, type GroupRule } from './riskGroups';
import type { SortedCohort } from './sortedCohort';
import { wilson } from './wilson';

export function groupedCalibration(s: SortedCohort, g = 10, rule: GroupRule = 'quantile-type2'): CalibrationGroup[] {
  return riskGroups(s, g, rule).map((gr, i) => ({
    group: i + 1,
    n: gr.n,
    events: gr.events,
    meanPredicted: gr.expected / gr.n,
    observed: wilson(gr.events, gr.n),
  }));
}
