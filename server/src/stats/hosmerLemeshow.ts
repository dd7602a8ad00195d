/**
 * Hosmer–Lemeshow statistic: C = Σ_groups (O − E)² / (E (1 − E/n_g)) over g groups of predicted risk, referred to
 * χ² on G df (G = non-empty groups). Source: Hosmer DW, Lemeshow S (1980) Commun Stat A9:1043–1069.
 * Choices: groups and ties as in riskGroups.ts (value cuts at quantiles of p, ties together, default type 2 — offer
 * type 7 through `hosmerLemeshowRule`). df = G for external validation: a published score's coefficients were not
 * fitted on these data, so no df is spent on them (Hosmer DW, Lemeshow S, Sturdivant RX 2013, Applied Logistic
 * Regression 3rd ed., Wiley, §5.2 on data not used to fit the model [mem]); G − 2 is the development-sample
 * convention, kept as `fit: 'development'` for a model fitted on the same rows (the birthwt reference check). A seeded
 * simulation in tests/unit/stats/hosmerLemeshowDf.test.ts shows G − 2 rejects a perfectly calibrated score too often.
 * With a single group there is no p-value. A group whose E is 0 or n_g contributes nothing (its term is 0/0 only
 * when O = E). Van Calster et al. (2019) advise not to rely on this test.
 */
import { chiSquareUpper } from './distributions';
import { riskGroups, type GroupRule } from './riskGroups';
import type { SortedCohort } from './sortedCohort';

export type HosmerLemeshowFit = 'external' | 'development';

export function hosmerLemeshow(
  s: SortedCohort,
  g = 10,
  rule: GroupRule = 'quantile-type2',
  fit: HosmerLemeshowFit = 'external',
) {
  const groups = riskGroups(s, g, rule);
  let stat = 0;
  for (const gr of groups) {
    const v = gr.expected * (1 - gr.expected / gr.n);
    if (v > 0) stat += ((gr.events - gr.expected) * (gr.events - gr.expected)) / v;
  }
  const df = fit === 'external' ? groups.length : groups.length - 2;
  const rq = rule === 'quantile-type2' ? 'type 2 (inverse empirical CDF)' : 'type 7 (linear interpolation)';
  const dfText =
    fit === 'external'
      ? 'df = groups (external validation: no coefficients fitted on these data)'
      : 'df = groups − 2 (model fitted on these data)';
  return {
    statistic: stat,
    df,
    pValue: df > 0 && groups.length >= 2 ? chiSquareUpper(stat, df) : NaN,
    groups: groups.length,
    rule: `${g} groups cut at quantiles of p, ${rq}; cuts on values so ties share a group; ${dfText}`,
  };
}
