/**
 * Imputation of a binary or categorical column with gaps, each with a draw of the model parameters.
 *  - Binary (0/1): logistic regression on the observed rows with the engine's logisticFit; β* ~ N(β̂, I(β̂)⁻¹); each
 *    missing row gets 1 with probability expit(x·β*) (mice 3.15's `logreg`).
 *  - Categorical (K ≥ 3 levels): multinomial (polytomous) logistic regression, reference level 0, by Newton–Raphson;
 *    β* ~ N(β̂, I(β̂)⁻¹); each missing row draws its level from the K fitted probabilities under β*.
 * Sources: van Buuren S, Groothuis-Oudshoorn K (2011) J Stat Softw 45(3), §3.2 (logreg, polyreg); Rubin DB (1987)
 * Multiple Imputation for Nonresponse in Surveys, Wiley (proper imputation draws the parameters); White IR, Daniel R,
 * Royston P (2010) Avoiding bias due to perfect prediction in multiple imputation of incomplete categorical variables,
 * Comput Stat Data Anal 54:2267–2275 (augmentation).
 * Choices: mice's `polyreg` fits nnet::multinom and draws no parameters; here the multinomial parameters are drawn like
 * the binary ones, so both imputations are proper. The multinomial fit always uses the White–Daniel–Royston augmentation
 * exactly as mice's `augment` builds it (2·p·K weighted pseudo-rows at the covariate means ± half an SD), which keeps
 * it finite under perfect prediction; a binary fit that separates falls back to that augmented fit with K = 2. Within a
 * chain each fit starts from the column's previous fit (`warm`): the same optimum, fewer Newton steps.
 */
import { logisticFit } from './logisticFit';
import { normalDraw, type Uniform } from './randomDraws';
import { addCorrelated, cholesky, choleskyInverse, choleskySolve, type Matrix } from './smallMatrix';

interface Rows {
  x: Float64Array[]; // covariate columns (no intercept), one entry per fitted row
  y: Float64Array;
  w: Float64Array;
}

/** The observed rows plus mice's augmentation rows (mice 3.15 `augment`). */
function augmentedRows(codes: Float64Array, observed: Uint8Array, design: Float64Array[], levels: number): Rows {
  const n = codes.length;
  const p = design.length;
  let nObs = 0;
  for (let i = 0; i < n; i++) nObs += observed[i];
  const nMis = n - nObs;
  const augment = p > 0 && nMis !== 1;
  const nr = augment ? 2 * p * levels : 0;
  const x = design.map(() => new Float64Array(nObs + nr));
  const y = new Float64Array(nObs + nr);
  const w = new Float64Array(nObs + nr).fill(1);
  for (let i = 0, r = 0; i < n; i++) {
    if (!observed[i]) continue;
    for (let j = 0; j < p; j++) x[j][r] = design[j][i];
    y[r++] = codes[i];
  }
  if (augment) {
    const stats = design.map((col) => {
      let mean = 0,
        min = Infinity,
        max = -Infinity;
      for (let i = 0; i < n; i++) {
        mean += col[i];
        if (col[i] < min) min = col[i];
        if (col[i] > max) max = col[i];
      }
      mean /= n;
      let ss = 0;
      for (let i = 0; i < n; i++) ss += (col[i] - mean) ** 2;
      return { mean, sd: Math.sqrt(ss / (n - 1)), min, max };
    });
    let r = nObs;
    for (let j = 0; j < p; j++) {
      for (let k = 0; k < levels; k++) {
        for (const sign of [0.5, -0.5]) {
          for (let c = 0; c < p; c++) {
            const s = stats[c];
            x[c][r] = c === j ? Math.min(s.max, Math.max(s.min, s.mean + sign * s.sd)) : s.mean;
          }
          y[r] = k;
          w[r] = (p + 1) / nr;
          r++;
        }
      }
    }
  }
  return { x, y, w };
}

/** Multinomial logistic fit: coefficients of levels 1 … K−1 against level 0, each [intercept, covariates…]. */
export function multinomialFit(
  rows: Rows,
  levels: number,
  start?: number[],
): { coef: number[]; covarianceChol: Matrix } | null {
  const P = rows.x.length + 1;
  const C = levels - 1;
  const dim = C * P;
  const n = rows.y.length;
  const beta = start && start.length === dim ? [...start] : new Array(dim).fill(0);
  const xi = new Float64Array(P);
  const xx = new Float64Array(P * P);
  const eta = new Float64Array(C);
  const evaluate = (b: number[], withDerivatives: boolean) => {
    let ll = 0;
    const g = new Array(dim).fill(0);
    const h: Matrix = withDerivatives ? Array.from({ length: dim }, () => new Array(dim).fill(0)) : [];
    const pi = new Float64Array(C);
    for (let i = 0; i < n; i++) {
      xi[0] = 1;
      for (let a = 1; a < P; a++) xi[a] = rows.x[a - 1][i];
      let maxEta = 0;
      for (let c = 0; c < C; c++) {
        let e = 0;
        for (let a = 0; a < P; a++) e += b[c * P + a] * xi[a];
        eta[c] = e;
        if (e > maxEta) maxEta = e;
      }
      let denom = Math.exp(-maxEta);
      for (let c = 0; c < C; c++) denom += Math.exp(eta[c] - maxEta);
      for (let c = 0; c < C; c++) pi[c] = Math.exp(eta[c] - maxEta) / denom;
      const yi = rows.y[i];
      const wi = rows.w[i];
      ll += wi * ((yi > 0 ? eta[yi - 1] : 0) - maxEta - Math.log(denom));
      if (!withDerivatives) continue;
      for (let a = 0; a < P; a++) for (let bb = 0; bb <= a; bb++) xx[a * P + bb] = xi[a] * xi[bb];
      for (let c = 0; c < C; c++) {
        const r = (yi === c + 1 ? 1 : 0) - pi[c];
        for (let a = 0; a < P; a++) g[c * P + a] += wi * r * xi[a];
        for (let d = 0; d <= c; d++) {
          const wcd = wi * pi[c] * ((c === d ? 1 : 0) - pi[d]);
          // each block Σ w·x·xᵀ is symmetric: fill its lower triangle here, the rest below
          for (let a = 0; a < P; a++) {
            const row = h[c * P + a];
            for (let bb = 0; bb <= a; bb++) row[d * P + bb] += wcd * xx[a * P + bb];
          }
        }
      }
    }
    if (withDerivatives) {
      for (let c = 0; c < C; c++)
        for (let d = 0; d <= c; d++)
          for (let a = 0; a < P; a++)
            for (let bb = a + 1; bb < P; bb++) h[c * P + a][d * P + bb] = h[c * P + bb][d * P + a];
      for (let r = 0; r < dim; r++) for (let s = r + 1; s < dim; s++) h[r][s] = h[s][r];
    }
    return { ll, g, h };
  };
  let cur = evaluate(beta, true);
  for (let it = 0; it < 100; it++) {
    const l = cholesky(cur.h);
    if (!l) return null;
    const delta = choleskySolve(l, cur.g);
    let scale = 1;
    let next = beta.map((b, j) => b + delta[j]);
    let cand = evaluate(next, true);
    if (cand.ll < cur.ll - 1e-12 * Math.abs(cur.ll)) {
      let ll = cand.ll;
      while (ll < cur.ll - 1e-12 * Math.abs(cur.ll) && scale > 1e-8) {
        scale /= 2;
        next = beta.map((b, j) => b + scale * delta[j]);
        ll = evaluate(next, false).ll;
      }
      cand = evaluate(next, true);
    }
    const small = delta.every((d, j) => Math.abs(scale * d) < 1e-9 * (1 + Math.abs(next[j])));
    for (let j = 0; j < dim; j++) beta[j] = next[j];
    cur = cand;
    if (small) {
      const lh = cholesky(cur.h);
      const vChol = lh ? cholesky(choleskyInverse(lh)) : null;
      return vChol ? { coef: [...beta], covarianceChol: vChol } : null;
    }
  }
  return null;
}

function drawLevels(
  target: Float64Array,
  observed: Uint8Array,
  design: Float64Array[],
  beta: number[],
  levels: number,
  rand: Uniform,
): void {
  const P = design.length + 1;
  const C = levels - 1;
  const prob = new Float64Array(levels);
  for (let i = 0; i < target.length; i++) {
    if (observed[i]) continue;
    let sum = 1;
    prob[0] = 1;
    for (let c = 0; c < C; c++) {
      let e = beta[c * P];
      for (let a = 1; a < P; a++) e += beta[c * P + a] * design[a - 1][i];
      prob[c + 1] = Math.exp(Math.min(e, 700));
      sum += prob[c + 1];
    }
    const u = rand() * sum;
    let acc = 0;
    let level = levels - 1;
    for (let k = 0; k < levels; k++) {
      acc += prob[k];
      if (u < acc) {
        level = k;
        break;
      }
    }
    target[i] = level;
  }
}

/** Fills the gaps of a column coded 0 … levels−1 in place (levels = 2: logistic; more: multinomial). */
export function categoricalImpute(
  target: Float64Array,
  observed: Uint8Array,
  design: Float64Array[],
  levels: number,
  rand: Uniform,
  warm?: { start?: number[] },
): void {
  if (levels === 2) {
    const n = target.length;
    let nObs = 0;
    for (let i = 0; i < n; i++) nObs += observed[i];
    const y = new Uint8Array(nObs);
    const cols = design.map(() => new Float64Array(nObs));
    for (let i = 0, r = 0; i < n; i++) {
      if (!observed[i]) continue;
      y[r] = target[i];
      for (let j = 0; j < design.length; j++) cols[j][r] = design[j][i];
      r++;
    }
    const fit = logisticFit(y, cols, {
      intercept: true,
      start: warm?.start?.length === design.length + 1 ? warm.start : undefined,
    });
    const l = fit.converged ? cholesky(fit.covariance) : null;
    if (fit.converged && l) {
      if (warm) warm.start = fit.coefficients;
      const z = Array.from({ length: l.length }, () => normalDraw(rand));
      const beta = addCorrelated(fit.coefficients, l, z);
      for (let i = 0; i < n; i++) {
        if (observed[i]) continue;
        let e = beta[0];
        for (let j = 0; j < design.length; j++) e += beta[j + 1] * design[j][i];
        target[i] = rand() <= 1 / (1 + Math.exp(-e)) ? 1 : 0;
      }
      return;
    }
  }
  const fit =
    multinomialFit(augmentedRows(target, observed, design, levels), levels, warm?.start) ??
    multinomialFit(augmentedRows(target, observed, design, levels), levels);
  if (!fit) throw new Error('the imputation model for a categorical column could not be fitted');
  if (warm) warm.start = fit.coef;
  const z = Array.from({ length: fit.coef.length }, () => normalDraw(rand));
  drawLevels(target, observed, design, addCorrelated(fit.coef, fit.covarianceChol, z), levels, rand);
}
