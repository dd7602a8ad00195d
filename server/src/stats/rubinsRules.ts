/**
 * Rubin's rules: pool m estimates Q_l with variances U_l from m completed data sets.
 *   Q̄ = mean Q_l; Ū = mean U_l; B = var(Q_l) (denominator m − 1); T = Ū + (1 + 1/m)·B;
 *   r = (1 + 1/m)·B/Ū (relative increase in variance); λ = (1 + 1/m)·B/T;
 *   ν_old = (m − 1)/λ²; with complete-data df ν_com: ν_obs = (ν_com + 1)/(ν_com + 3)·ν_com·(1 − λ),
 *   ν = ν_old·ν_obs/(ν_old + ν_obs) (Barnard–Rubin), or ν_old when ν_com is infinite;
 *   fmi = (r + 2/(ν + 3))/(r + 1); 95% CI Q̄ ± t_{ν, 0.975}·√T.
 * Sources: Rubin DB (1987) Multiple Imputation for Nonresponse in Surveys, Wiley, §3.1; Barnard J, Rubin DB (1999)
 * Small-sample degrees of freedom with multiple imputation, Biometrika 86:948–955; van Buuren S, Groothuis-Oudshoorn K
 * (2011) mice, J Stat Softw 45(3):1–67, whose pool.scalar (rule "rubin1987", mice 3.15) this follows line by line,
 * including its floor λ ≥ 1e-4 inside the df formula (so B = 0 gives a large finite ν, not a division by zero).
 * Scales: Marshall A, Altman DG, Holder RL, Royston P (2009) Combining estimates of interest in prognostic modelling
 * studies after multiple imputation, BMC Med Res Methodol 9:57 — pool where the estimate is closest to normal: AUC on
 * the logit scale, O/E on the log scale (delta-method variances), calibration intercept and slope as they are; the
 * pooled estimate and interval are transformed back.
 */
import { tQuantile } from './studentT';

export interface PooledScalar {
  m: number;
  /** pooled estimate on the pooling scale */
  qbar: number;
  /** within-imputation variance Ū */
  within: number;
  /** between-imputation variance B */
  between: number;
  /** total variance T */
  total: number;
  /** relative increase in variance due to nonresponse, r */
  riv: number;
  /** proportion of the total variance due to missingness, λ */
  lambda: number;
  /** fraction of missing information */
  fmi: number;
  df: number;
  lower: number;
  upper: number;
}

export function barnardRubinDf(m: number, b: number, t: number, dfComplete = Infinity): number {
  let lambda = ((1 + 1 / m) * b) / t;
  if (lambda < 1e-4) lambda = 1e-4;
  const dfOld = (m - 1) / (lambda * lambda);
  if (dfComplete === Infinity) return dfOld;
  const dfObs = ((dfComplete + 1) / (dfComplete + 3)) * dfComplete * (1 - lambda);
  return (dfOld * dfObs) / (dfOld + dfObs);
}

/** `dfComplete` is mice's n − k (Inf by default, as pool.scalar's n = Inf). */
export function poolScalar(q: ArrayLike<number>, u: ArrayLike<number>, dfComplete = Infinity): PooledScalar {
  const m = q.length;
  if (m < 2 || u.length !== m) throw new Error("Rubin's rules need at least 2 estimates, each with its variance");
  let qbar = 0;
  let ubar = 0;
  for (let i = 0; i < m; i++) {
    qbar += q[i];
    ubar += u[i];
  }
  qbar /= m;
  ubar /= m;
  let b = 0;
  for (let i = 0; i < m; i++) b += (q[i] - qbar) ** 2;
  b /= m - 1;
  const total = ubar + (1 + 1 / m) * b;
  const riv = ((1 + 1 / m) * b) / ubar;
  const lambda = ((1 + 1 / m) * b) / total;
  const df = barnardRubinDf(m, b, total, dfComplete);
  const fmi = (riv + 2 / (df + 3)) / (riv + 1);
  const half = tQuantile(0.975, df) * Math.sqrt(total);
  return { m, qbar, within: ubar, between: b, total, riv, lambda, fmi, df, lower: qbar - half, upper: qbar + half };
}

export type PoolingScale = 'identity' | 'logit' | 'log';

export interface PooledMetric extends PooledScalar {
  scale: PoolingScale;
  /** back on the metric's own scale */
  estimate: number;
  estimateLower: number;
  estimateUpper: number;
}

const forward = { identity: (x: number) => x, logit: (x: number) => Math.log(x / (1 - x)), log: Math.log };
const back = { identity: (x: number) => x, logit: (x: number) => 1 / (1 + Math.exp(-x)), log: Math.exp };
/** d(scale)/dx for the delta method */
const slope = { identity: () => 1, logit: (x: number) => 1 / (x * (1 - x)), log: (x: number) => 1 / x };

/** Estimates and their variances on the pooling scale (the delta method for the variances): what Rubin's rules pool. */
export function onPoolingScale(
  estimates: ArrayLike<number>,
  ses: ArrayLike<number>,
  scale: PoolingScale,
): { q: Float64Array; u: Float64Array } {
  const m = estimates.length;
  const q = new Float64Array(m);
  const u = new Float64Array(m);
  for (let i = 0; i < m; i++) {
    q[i] = forward[scale](estimates[i]);
    u[i] = (ses[i] * slope[scale](estimates[i])) ** 2;
  }
  return { q, u };
}

/** Pools estimates given on the metric's own scale with their standard errors, on `scale` (Marshall et al. 2009). */
export function poolMetric(
  estimates: ArrayLike<number>,
  ses: ArrayLike<number>,
  scale: PoolingScale,
  dfComplete = Infinity,
): PooledMetric {
  const { q, u } = onPoolingScale(estimates, ses, scale);
  const pooled = poolScalar(q, u, dfComplete);
  return {
    ...pooled,
    scale,
    estimate: back[scale](pooled.qbar),
    estimateLower: back[scale](pooled.lower),
    estimateUpper: back[scale](pooled.upper),
  };
}
