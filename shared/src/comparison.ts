// Plain sentences for a head-to-head comparison of two scores on the same patients (server/src/stats/compareScores.ts),
// shared by the command line, the pages and the report so each says it the same way. The difference is always given
// as a positive amount for the score that is ahead, with its 95% CI on that same side.
import { formatFigure, formatPercentTrim, formatPValue } from './format';

/** A difference between two scores with its 95% CI (every part known). */
export interface Difference {
  estimate: number;
  lower: number;
  upper: number;
}

export interface ComparisonNames {
  first: string;
  second: string;
}

/** The interval seen from the score that is ahead: a difference of −0.03 (−0.05 to −0.01) reads 0.03 (0.01 to 0.05). */
function ahead(d: Difference): { sign: 1 | -1; e: Difference } {
  return d.estimate >= 0
    ? { sign: 1, e: d }
    : { sign: -1, e: { estimate: -d.estimate, lower: -d.upper, upper: -d.lower } };
}

/** "Score A has the higher AUC, by 0.031 (95% CI 0.010 to 0.052; paired DeLong test p = 0.004)." */
export function aucComparisonSentence(names: ComparisonNames, difference: Difference, pValue: number): string {
  if (difference.estimate === 0)
    return `${names.first} and ${names.second} have the same AUC (paired DeLong test ${formatPValue(pValue)}).`;
  const { sign, e } = ahead(difference);
  const [hi, lo] = sign === 1 ? [names.first, names.second] : [names.second, names.first];
  const crosses = difference.lower <= 0 && difference.upper >= 0;
  return (
    `${hi} has the higher AUC, by ${formatFigure('auc', e.estimate)} (95% CI ${formatFigure('auc', e.lower)} to ${formatFigure('auc', e.upper)}; paired DeLong test ${formatPValue(pValue)})` +
    (crosses ? `: the interval includes no difference from ${lo}.` : '.')
  );
}

/** "At a threshold of 10%, Score A has the higher net benefit, by 0.0123 (95% CI 0.0040 to 0.0201)." */
export function netBenefitComparisonSentence(
  names: ComparisonNames,
  threshold: number,
  difference: Difference,
): string {
  const at = `At a threshold of ${formatPercentTrim(threshold)}`;
  if (difference.estimate === 0) return `${at}, ${names.first} and ${names.second} have the same net benefit.`;
  const { sign, e } = ahead(difference);
  const hi = sign === 1 ? names.first : names.second;
  const ci =
    Number.isFinite(e.lower) && Number.isFinite(e.upper)
      ? ` (95% CI ${formatFigure('netBenefit', e.lower)} to ${formatFigure('netBenefit', e.upper)})`
      : '';
  return `${at}, ${hi} has the higher net benefit, by ${formatFigure('netBenefit', e.estimate)}${ci}.`;
}
