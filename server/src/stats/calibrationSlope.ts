/**
 * Calibration slope: β in logit P(y=1) = a + β·logit p (ideal 1; < 1 means predictions too extreme), with Wald 95%
 * CI and the model's intercept a. Sources: Cox DR (1958) Biometrika 45:562–565; Van Calster B et al. (2016) J Clin
 * Epidemiol 74:167–176 ("weak" calibration).
 * Choices: logit p from p clamped to [1e-15, 1 − 1e-15]. With one covariate, the MLE does not exist exactly when the
 * outcomes are (quasi-)separated by logit p — every event at or above every non-event, or the reverse — so that is
 * checked before fitting and reported as 'separation'; identical logit p for everyone is 'degenerate'.
 */
import type { Estimate, FitResult } from '@shared/validation';
import { Z975 } from './distributions';
import { logisticFit } from './logisticFit';

export function calibrationSlope(
  logitP: Float64Array,
  y: Uint8Array,
): FitResult<Estimate & { se: number; intercept: number }> {
  let minE = Infinity;
  let maxE = -Infinity;
  let minN = Infinity;
  let maxN = -Infinity;
  for (let i = 0; i < y.length; i++) {
    const x = logitP[i];
    if (y[i] === 1) {
      if (x < minE) minE = x;
      if (x > maxE) maxE = x;
    } else {
      if (x < minN) minN = x;
      if (x > maxN) maxN = x;
    }
  }
  if (Math.min(minE, minN) === Math.max(maxE, maxN))
    return {
      converged: false,
      reason: 'degenerate',
      detail: 'every row has the same predicted risk: the slope is not estimable',
    };
  if (maxN <= minE || maxE <= minN)
    return {
      converged: false,
      reason: 'separation',
      detail: 'predicted risk separates events from non-events completely: the slope is not estimable (it diverges)',
    };
  const fit = logisticFit(y, [logitP], { intercept: true, start: [0, 1] });
  if (!fit.converged) return fit;
  const b = fit.coefficients[1];
  const se = fit.se[1];
  return {
    converged: true,
    estimate: b,
    se,
    lower: b - Z975 * se,
    upper: b + Z975 * se,
    intercept: fit.coefficients[0],
  };
}
