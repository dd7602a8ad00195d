/**
 * Calibration-in-the-large: α in logit P(y=1) = α + offset(logit p), the shift that makes mean predicted risk match
 * the observed rate on the logit scale; ideal 0. Wald 95% CI α ± 1.96·SE.
 * Sources: Cox DR (1958) Biometrika 45:562–565; Van Calster B et al. (2016) J Clin Epidemiol 74:167–176 ("mean"
 * calibration). Choice: logit p from p clamped to [1e-15, 1 − 1e-15] (see checkInputs.ts).
 */
import type { Estimate, FitResult } from '@shared/validation';
import { Z975 } from './distributions';
import { logisticFit } from './logisticFit';

export function calibrationIntercept(logitP: Float64Array, y: Uint8Array): FitResult<Estimate & { se: number }> {
  const fit = logisticFit(y, [], { offset: logitP, intercept: true });
  if (!fit.converged) return fit;
  const a = fit.coefficients[0];
  const se = fit.se[0];
  return { converged: true, estimate: a, se, lower: a - Z975 * se, upper: a + Z975 * se };
}
