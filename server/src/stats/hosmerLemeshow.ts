/**
 * Hosmer–Lemeshow statistic: C = Σ_groups (O − E)² / (E (1 − E/n_g)) over g groups of predicted risk, referred to
 * χ² on G − 2 df (G = non-empty groups). Source: Hosmer DW, Lemeshow S (1980) Commun Stat A9:1043–1069.
 * Choices: groups and ties as in riskGroups.ts (value cuts at quantiles of p, ties together, default type 2 — offer
 * type 7 through `hosmerLemeshowRule`). df = G − 2 is the development-sample convention; for external validation some
 * authors use G df [mem] — the df is reported so a reader can refer it either way. A group whose E is 0 or n_g
 * contributes nothing (its term is 0/0 only when O = E). Van Calster et al. (2019) advise not to rely on this test.
 */
import { chiSquareUpper } from './distributions';
import { riskGroups, type GroupRule } from './riskGroups';
import type { SortedCohort } from './sortedCohort';

export function hosmerLemeshow(s: SortedCohort, g = 10, rule: GroupRule = 'quantile-type2') {
  const groups = riskGroups(s, g, rule);
  let stat = 0;
  for (const gr of groups) {
    const v = gr.expected * (1 - gr.expected / gr.n);
    if (v > 0) stat += ((gr.events - gr.expected) * (gr.events - gr.expected)) / v;
  }
  const df = groups.length - 2;
  const rq = rule === 'quantile-type2' ? 'type 2 (inverse empirical CDF)' : 'type 7 (linear interpolation)';
  return {
    statistic: stat,
    df,
    pValue: df > 0 ? chiSquareUpper(stat, df) : NaN,
    groups: groups.length,
    rule: `${g} groups cut at quantiles of p, ${rq}; cuts on values so ties share a group; df = groups − 2`,
  };
}
