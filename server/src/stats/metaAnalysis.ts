/**
 * Random-effects meta-analysis of per-site estimates y_i with known variances v_i, and the fixed-effect test of
 * heterogeneity across subgroup levels.
 *   τ² by restricted maximum likelihood (REML), Fisher scoring: τ² ← τ² + (Σ w_i²(y_i − μ̂)² − tr P) / tr P²,
 *   w_i = 1/(v_i + τ²), P = W − w wᵀ/Σw, truncated at 0 — Viechtbauer W (2005) J Educ Behav Stat 30:261–293;
 *   the same algorithm and stopping rule as R's metafor::rma(method = "REML") (Viechtbauer 2010, J Stat Softw 36(3)).
 *   Pooled μ̂ = Σw y / Σw, SE = 1/√Σw, Wald 95% CI; Cochran's Q = Σ (y_i − ȳ_FE)²/v_i on k − 1 df (Cochran WG 1954,
 *   Biometrics 10:101–129); I² = τ²/(τ² + s²), s² = (k − 1)Σ(1/v) / ((Σ 1/v)² − Σ 1/v²), as metafor reports it
 *   (Higgins JPT, Thompson SG 2002, Stat Med 21:1539–1558).
 *   95% prediction interval μ̂ ± t_{k−2, 0.975} √(τ² + SE²) — Riley RD, Higgins JPT, Deeks JJ (2011) BMJ 342:d549.
 * Choice: metafor's predict() uses the normal quantile by default (t only with test = "t", and then k − 1 df); we
 * report Riley's t on k − 2 df as the prediction interval and metafor's normal one beside it for comparison.
 * Per-site scales follow Debray TPA et al. (2017) BMJ 356:i6460: AUC on the logit scale (SE by the delta method from
 * DeLong's SE: SE(logit A) = SE(A)/(A(1 − A))), calibration-in-the-large and slope as estimated, O/E on the log scale.
 */
import { tQuantile } from './studentT';
import type { HeterogeneityTest, RandomEffectsResult } from '@shared/subgroups';
import { chiSquareUpper, normalTwoSided, Z975 } from './distributions';

export type { HeterogeneityTest, RandomEffectsResult } from '@shared/subgroups';

function fixedEffect(y: number[], v: number[]) {
  let sw = 0,
    swy = 0,
    sw2 = 0;
  for (let i = 0; i < y.length; i++) {
    const w = 1 / v[i];
    sw += w;
    swy += w * y[i];
    sw2 += w * w;
  }
  const mean = swy / sw;
  let q = 0;
  for (let i = 0; i < y.length; i++) q += (y[i] - mean) ** 2 / v[i];
  return { mean, se: Math.sqrt(1 / sw), q, sw, sw2 };
}

function checkInput(y: number[], se: number[], minK: number) {
  if (y.length !== se.length) throw new RangeError('estimates and standard errors differ in length');
  if (y.length < minK) throw new RangeError(`at least ${minK} estimates are needed`);
  for (let i = 0; i < y.length; i++) {
    if (!Number.isFinite(y[i]) || !(se[i] > 0) || !Number.isFinite(se[i]))
      throw new RangeError(`estimate ${i + 1} has no finite value and positive standard error`);
  }
}

/** REML random-effects meta-analysis of estimates with their standard errors (at least 2). */
export function randomEffectsReml(
  y: number[],
  se: number[],
  opts: { tolerance?: number; maxIterations?: number } = {},
): RandomEffectsResult {
  checkInput(y, se, 2);
  const { tolerance = 1e-12, maxIterations = 1000 } = opts;
  const k = y.length;
  const v = se.map((s) => s * s);
  const fe = fixedEffect(y, v);
  // start from the DerSimonian–Laird value (DerSimonian R, Laird N 1986, Control Clin Trials 7:177–188)
  let tau2 = Math.max(0, (fe.q - (k - 1)) / (fe.sw - fe.sw2 / fe.sw));
  let iterations = 0;
  for (; iterations < maxIterations; iterations++) {
    let sw = 0,
      sw2 = 0,
      sw3 = 0,
      swy = 0;
    for (let i = 0; i < k; i++) {
      const w = 1 / (v[i] + tau2);
      sw += w;
      sw2 += w * w;
      sw3 += w * w * w;
      swy += w * y[i];
    }
    const mu = swy / sw;
    let yPPy = 0;
    for (let i = 0; i < k; i++) yPPy += (y[i] - mu) ** 2 / (v[i] + tau2) ** 2;
    const trP = sw - sw2 / sw;
    const trPP = sw2 - (2 * sw3) / sw + (sw2 * sw2) / (sw * sw);
    const next = Math.max(0, tau2 + (yPPy - trP) / trPP);
    const change = Math.abs(next - tau2);
    tau2 = next;
    if (change < tolerance) break;
  }
  let sw = 0,
    swy = 0;
  for (let i = 0; i < k; i++) {
    const w = 1 / (v[i] + tau2);
    sw += w;
    swy += w * y[i];
  }
  const estimate = swy / sw;
  const seMu = Math.sqrt(1 / sw);
  const s2 = ((k - 1) * fe.sw) / (fe.sw * fe.sw - fe.sw2);
  const spread = Math.sqrt(tau2 + seMu * seMu);
  const t = k >= 3 ? tQuantile(0.975, k - 2) : NaN;
  return {
    k,
    tau2,
    estimate,
    se: seMu,
    lower: estimate - Z975 * seMu,
    upper: estimate + Z975 * seMu,
    z: estimate / seMu,
    pValue: normalTwoSided(estimate / seMu),
    q: fe.q,
    qDf: k - 1,
    qPValue: chiSquareUpper(fe.q, k - 1),
    i2: (100 * tau2) / (tau2 + s2),
    predictionInterval: { lower: estimate - t * spread, upper: estimate + t * spread, df: k - 2 },
    predictionIntervalNormal: { lower: estimate - Z975 * spread, upper: estimate + Z975 * spread },
    iterations: iterations + 1,
  };
}

export const HETEROGENEITY_METHOD =
  "Cochran's Q under a fixed-effect model, χ² on levels − 1 df (Cochran 1954, Biometrics 10:101–129)";

/** Do the levels' estimates differ more than their standard errors allow? Cochran's Q test (at least 2 levels). */
export function heterogeneityTest(y: number[], se: number[]): HeterogeneityTest {
  checkInput(y, se, 2);
  const fe = fixedEffect(
    y,
    se.map((s) => s * s),
  );
  return {
    pooled: fe.mean,
    pooledSe: fe.se,
    q: fe.q,
    df: y.length - 1,
    pValue: chiSquareUpper(fe.q, y.length - 1),
    method: HETEROGENEITY_METHOD,
  };
}
