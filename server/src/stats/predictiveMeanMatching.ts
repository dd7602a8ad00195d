/**
 * Predictive mean matching (PMM) for a numeric column with gaps, as mice's default `pmm` (mice 3.15, type-1 matching,
 * d = 5 donors).
 *  1. Bayesian linear regression draw on the observed rows (mice's .norm.draw): β̂ = (XᵀX)⁻¹Xᵀy, σ*² = RSS/g with
 *     g ~ χ²(n_obs − p), β* = β̂ + σ*·chol((XᵀX)⁻¹)·z, z ~ N(0, I).
 *  2. Type-1 matching: predicted means of observed rows from β̂, of missing rows from β*; each missing row takes the
 *     observed value of one donor drawn at random from the d observed rows whose predicted means are nearest.
 * Sources: Little RJA (1988) Missing-data adjustments in large surveys, J Bus Econ Stat 6:287–296; van Buuren S,
 * Groothuis-Oudshoorn K (2011) J Stat Softw 45(3), §3.4 and mice's mice.impute.pmm; Morris TP, White IR, Royston P
 * (2014) Tuning multiple imputation by predictive mean matching and local residual draws, BMC Med Res Methodol 14:75
 * (type-1 matching, the donor pool d; d = 5 as mice's default). So every imputed value is a value someone has.
 * Choice: normal equations with Cholesky (mice uses QR; same β̂ up to rounding); when XᵀX is singular the ridge
 * penalty 1e-5·diag(XᵀX) that mice's estimice falls back to.
 */
import { chiSquareDraw, normalDraw, type Uniform } from './randomDraws';
import { addCorrelated, cholesky, choleskyInverse, choleskySolve, type Matrix } from './smallMatrix';

/** XᵀX and Xᵀy over the rows where `use` is 1, with an intercept as the first column. */
function normalEquations(
  design: Float64Array[],
  target: Float64Array,
  use: Uint8Array,
): { xtx: Matrix; xty: number[]; rows: number } {
  const p = design.length + 1;
  const xtx: Matrix = Array.from({ length: p }, () => new Array(p).fill(0));
  const xty = new Array(p).fill(0);
  const x = new Float64Array(p);
  x[0] = 1;
  let rows = 0;
  for (let i = 0; i < target.length; i++) {
    if (!use[i]) continue;
    rows++;
    for (let j = 1; j < p; j++) x[j] = design[j - 1][i];
    const t = target[i];
    for (let a = 0; a < p; a++) {
      xty[a] += x[a] * t;
      const xa = x[a];
      const row = xtx[a];
      for (let b = 0; b <= a; b++) row[b] += xa * x[b];
    }
  }
  for (let a = 0; a < p; a++) for (let b = a + 1; b < p; b++) xtx[a][b] = xtx[b][a];
  return { xtx, xty, rows };
}

export interface LinearDraw {
  coef: number[];
  beta: number[];
  sigma: number;
}

/** The regression-parameter draw of step 1. */
export function bayesianLinearDraw(
  design: Float64Array[],
  target: Float64Array,
  observed: Uint8Array,
  rand: Uniform,
): LinearDraw {
  const { xtx, xty, rows } = normalEquations(design, target, observed);
  const p = xtx.length;
  let l = cholesky(xtx);
  if (!l) {
    const ridged = xtx.map((row, i) => row.map((v, j) => (i === j ? v + 1e-5 * xtx[i][i] : v)));
    l = cholesky(ridged);
    if (!l)
      throw new Error('the imputation model is degenerate (a predictor column without variation among observed rows?)');
  }
  const coef = choleskySolve(l, xty);
  let rss = 0;
  for (let i = 0; i < target.length; i++) {
    if (!observed[i]) continue;
    let f = coef[0];
    for (let j = 1; j < p; j++) f += coef[j] * design[j - 1][i];
    rss += (target[i] - f) ** 2;
  }
  const df = Math.max(rows - p, 1);
  const sigma = Math.sqrt(rss / chiSquareDraw(df, rand));
  const vChol = cholesky(choleskyInverse(l));
  const z = Array.from({ length: p }, () => normalDraw(rand));
  const beta = vChol ? addCorrelated(coef, vChol, z, sigma) : coef;
  return { coef, beta, sigma };
}

/**
 * Fills the gaps of `target` (rows where observed[i] = 0) in place; `design` holds the current values of the other
 * columns of the imputation model. Returns the donor row of each filled row, in row order.
 */
export function pmmImpute(
  target: Float64Array,
  observed: Uint8Array,
  design: Float64Array[],
  rand: Uniform,
  donors = 5,
): Int32Array {
  const { coef, beta } = bayesianLinearDraw(design, target, observed, rand);
  return pmmMatch(target, observed, design, coef, beta, rand, donors);
}

/** Step 2 alone: type-1 matching given β̂ (`coef`, for donors) and β* (`beta`, for the rows to fill). */
export function pmmMatch(
  target: Float64Array,
  observed: Uint8Array,
  design: Float64Array[],
  coef: number[],
  beta: number[],
  rand: Uniform,
  donors = 5,
): Int32Array {
  const p = coef.length;
  const n = target.length;
  const fitted = (b: number[], i: number) => {
    let f = b[0];
    for (let j = 1; j < p; j++) f += b[j] * design[j - 1][i];
    return f;
  };
  let nObs = 0;
  for (let i = 0; i < n; i++) nObs += observed[i];
  const obsRows = new Uint32Array(nObs);
  const obsFit = new Float64Array(nObs);
  for (let i = 0, k = 0; i < n; i++) if (observed[i]) obsRows[k++] = i;
  for (let k = 0; k < nObs; k++) obsFit[k] = fitted(coef, obsRows[k]);
  // donors in order of their predicted means
  const order = Uint32Array.from({ length: nObs }, (_, k) => k).sort((a, b) => obsFit[a] - obsFit[b]);
  const sortedFit = Float64Array.from(order, (k) => obsFit[k]);
  const d = Math.min(donors, nObs);
  const chosen: number[] = [];
  for (let i = 0; i < n; i++) {
    if (observed[i]) continue;
    const yhat = fitted(beta, i);
    let lo = 0,
      hi = nObs;
    while (lo < hi) {
      const mid = (lo + hi) >>> 1;
      if (sortedFit[mid] < yhat) lo = mid + 1;
      else hi = mid;
    }
    // walk outwards from the insertion point; the (pick+1)-th nearest is the donor
    const pick = Math.floor(rand() * d);
    let left = lo - 1,
      right = lo,
      donor = -1;
    for (let step = 0; step <= pick; step++) {
      const takeLeft = right >= nObs || (left >= 0 && yhat - sortedFit[left] <= sortedFit[right] - yhat);
      donor = takeLeft ? left-- : right++;
    }
    const row = obsRows[order[donor]];
    target[i] = target[row];
    chosen.push(row);
  }
  return Int32Array.from(chosen);
}
