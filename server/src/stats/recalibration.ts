/**
 * Model updating by recalibration of the linear predictor lp = logit(p):
 *   intercept update:        logit P(y=1) = a + lp           (lp as offset; "recalibration in the large")
 *   logistic recalibration:  logit P(y=1) = a + b·lp         (Cox 1958)
 * fitted by maximum likelihood (Newton–Raphson / IRLS in logisticFit = minimum cross-entropy; never least squares).
 * The updated formula is the original one transformed: intercept' = a + b·β0, coefficient'_j = b·β_j (b = 1 for the
 * intercept update), which reproduces the recalibrated predictions exactly, spline and indicator terms included,
 * because every term enters lp linearly.
 * Sources: Cox DR (1958). Biometrika 45:562–565; Steyerberg EW (2019). Clinical Prediction Models, 2nd ed., ch. 20;
 * Vergouwe Y et al. (2017). Stat Med 36:4529–4539.
 * Choices: Wald 95% CIs (estimate ± 1.96·SE); a failed fit (separation, non-convergence) is returned as a value.
 */
import type { ScoreModel } from '@shared/model';
import type { FitResult } from '@shared/validation';
import { Z975 } from './distributions';
import { logisticFit } from './logisticFit';

export interface UpdateFit {
  method: 'intercept' | 'logistic';
  a: { estimate: number; se: number; lower: number; upper: number };
  b: { estimate: number; se: number; lower: number; upper: number };
  logLik: number;
}

const ci = (estimate: number, se: number) => ({
  estimate,
  se,
  lower: estimate - Z975 * se,
  upper: estimate + Z975 * se,
});

/** Log-likelihood of y under the unchanged score (a = 0, b = 1). */
export function originalLogLik(lp: Float64Array, y: Uint8Array): number {
  let ll = 0;
  for (let i = 0; i < lp.length; i++) {
    const eta = lp[i];
    // log expit(±eta) without overflow
    const s = y[i] === 1 ? -eta : eta;
    ll -= s > 0 ? s + Math.log1p(Math.exp(-s)) : Math.log1p(Math.exp(s));
  }
  return ll;
}

export function interceptUpdate(lp: Float64Array, y: Uint8Array): FitResult<UpdateFit> {
  const fit = logisticFit(y, [], { intercept: true, offset: lp });
  if (!fit.converged) return fit;
  return {
    converged: true,
    method: 'intercept',
    a: ci(fit.coefficients[0], fit.se[0]),
    b: { estimate: 1, se: 0, lower: 1, upper: 1 },
    logLik: fit.logLik,
  };
}

export function logisticRecalibration(lp: Float64Array, y: Uint8Array): FitResult<UpdateFit> {
  const fit = logisticFit(y, [lp], { intercept: true });
  if (!fit.converged) return fit;
  return {
    converged: true,
    method: 'logistic',
    a: ci(fit.coefficients[0], fit.se[0]),
    b: ci(fit.coefficients[1], fit.se[1]),
    logLik: fit.logLik,
  };
}

/** The original formula with its linear predictor replaced by a + b·lp. */
export function transformModel(model: ScoreModel, a: number, b: number): ScoreModel {
  return {
    intercept: a + b * model.intercept,
    predictors: model.predictors.map((p) => ({ ...p, coefficient: b * p.coefficient })),
  };
}

/** Recalibrated probabilities straight from a, b and lp (for before/after plots). */
export function recalibratedProbabilities(lp: Float64Array, a: number, b: number): Float64Array {
  const out = new Float64Array(lp.length);
  for (let i = 0; i < lp.length; i++) out[i] = 1 / (1 + Math.exp(-(a + b * lp[i])));
  return out;
}
