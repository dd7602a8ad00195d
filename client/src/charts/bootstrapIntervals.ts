// Figures with their bootstrap 95% CI when a run asked for replicates: the intervals the engine stores under
// ValidationResult.bootstrap, keyed as server/src/stats/bootstrap.ts names them ('brier', 'ici', 'netBenefit@0.1', …).
import { formatCount, formatEstimate, formatFigure, type Figure } from '@shared/format';
import type { Estimate, ValidationResult } from '@shared/validation';

type Bootstrap = ValidationResult['bootstrap'];

/** The stored interval of one metric, or null when the run has no replicates or the interval could not be had. */
export function bootstrapInterval(bootstrap: Bootstrap | null | undefined, key: string): Estimate | null {
  const e = bootstrap?.intervals[key];
  return e && Number.isFinite(e.lower) && Number.isFinite(e.upper) ? e : null;
}

/** "0.1234 (95% CI 0.1180 to 0.1290)" with replicates, "0.1234" without. */
export function withInterval(figure: Figure, value: number, bootstrap: Bootstrap | null | undefined, key: string) {
  const e = bootstrapInterval(bootstrap, key);
  return e ? formatEstimate(figure, { estimate: value, lower: e.lower, upper: e.upper }) : formatFigure(figure, value);
}

/** "2,000 replicates, seed 42": what a reader needs to repeat the intervals. */
export const replicatesAndSeed = (b: { replicates: number; seed: number }) =>
  `${formatCount(b.replicates)} replicate${b.replicates === 1 ? '' : 's'}, seed ${b.seed}`;
