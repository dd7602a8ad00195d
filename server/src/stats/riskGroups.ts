/**
 * Groups of predicted risk, shared by Hosmer–Lemeshow and the grouped calibration curve.
 * Rule: cut points are the quantiles of p at k/g (k = 0 … g), duplicates dropped; group 1 is [q0, q1], group j is
 * (q_{j−1}, q_j] — R's cut(p, unique(quantile(p, type)), include.lowest = TRUE, right = TRUE). Cuts are on values,
 * so tied predictions always share a group, and with many ties there may be fewer than g groups. With g or fewer
 * distinct risks, each distinct risk is its own group (a score with three risk levels gives three groups, not the two
 * the quantile cuts would leave, whose lowest group joins the first two levels).
 * Two quantile definitions (Hyndman RJ, Fan Y (1996) Am Stat 50:361–365): 'quantile-type2' (inverse empirical CDF,
 * averaging at jumps; default — cut points are observed values) and 'quantile-type7' (linear interpolation, R's
 * default quantile). Source for why the choice matters: see docs/references.md (birthwt: 9.6525 vs 10.398).
 */
import { quantileType2, quantileType7, type SortedCohort } from './sortedCohort';

export type GroupRule = 'quantile-type2' | 'quantile-type7';

export interface RiskGroup {
  n: number;
  events: number;
  expected: number; // Σp
  lowerCut: number;
  upperCut: number;
}

export function riskGroups(s: SortedCohort, g: number, rule: GroupRule): RiskGroup[] {
  // No more distinct risks than groups: one group per distinct risk (quantile cuts would merge the lowest two).
  if (s.groupValue.length <= g)
    return Array.from(s.groupValue, (v, k) => ({
      n: s.groupTotal[k],
      events: s.groupEvents[k],
      expected: v * s.groupTotal[k],
      lowerCut: v,
      upperCut: v,
    }));
  const q = rule === 'quantile-type2' ? quantileType2 : quantileType7;
  const cuts: number[] = [];
  for (let k = 0; k <= g; k++) {
    const c = k === 0 ? s.p[0] : k === g ? s.p[s.n - 1] : q(s.p, k / g);
    if (cuts.length === 0 || c > cuts[cuts.length - 1]) cuts.push(c);
  }
  if (cuts.length === 1) cuts.push(cuts[0]); // every p equal: one group
  const groups: RiskGroup[] = [];
  for (let j = 1; j < cuts.length; j++)
    groups.push({ n: 0, events: 0, expected: 0, lowerCut: cuts[j - 1], upperCut: cuts[j] });
  let j = 0;
  for (let i = 0; i < s.n; i++) {
    const v = s.p[i];
    while (j < groups.length - 1 && v > groups[j].upperCut) j++;
    const gr = groups[j];
    gr.n++;
    gr.events += s.y[i];
    gr.expected += v;
  }
  return groups.filter((gr) => gr.n > 0);
}
