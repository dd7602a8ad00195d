/**
 * Maximum-likelihood logistic regression of y on a few covariates with an optional offset:
 *   logit P(y=1) = offset + Σ β_j x_j, fitted by Newton–Raphson (= IRLS for the canonical link), step-halving when
 *   the log-likelihood falls; SE from the inverse observed information at the optimum.
 * Source: McCullagh P, Nelder JA (1989) Generalized Linear Models, 2nd ed., §2.5 and §4.4.
 * Choices: start at `start` (default 0); converged when every |Δβ| < 1e-10·(1 + |β|) (tighter than statsmodels'
 * default deviance rule, so results agree to ~1e-8 relative); at most 100 iterations. Separation shows as
 * coefficients that keep growing while the fitted probabilities reach 0 or 1: reported as
 * `{ converged: false, reason: 'separation' }`, never as a huge number.
 */
import type { FitResult } from '@shared/validation';

export interface LogisticFit {
  coefficients: number[];
  se: number[];
  /** inverse observed information at the optimum (the parameter draw of multiple imputation needs all of it) */
  covariance: number[][];
  logLik: number;
  iterations: number;
}

function solve(a: number[][], b: number[]): number[] | null {
  // Gaussian elimination with partial pivoting on a small k × k system
  const k = b.length;
  const m = a.map((row, i) => [...row, b[i]]);
  for (let c = 0; c < k; c++) {
    let piv = c;
    for (let r = c + 1; r < k; r++) if (Math.abs(m[r][c]) > Math.abs(m[piv][c])) piv = r;
    if (!(Math.abs(m[piv][c]) > 1e-300)) return null;
    [m[c], m[piv]] = [m[piv], m[c]];
    for (let r = 0; r < k; r++) {
      if (r === c) continue;
      const f = m[r][c] / m[c][c];
      for (let j = c; j <= k; j++) m[r][j] -= f * m[c][j];
    }
  }
  return m.map((row, i) => row[k] / row[i]);
}

function invert(a: number[][]): number[][] | null {
  const k = a.length;
  const cols: number[][] = [];
  for (let j = 0; j < k; j++) {
    const e = new Array(k).fill(0);
    e[j] = 1;
    const col = solve(a, e);
    if (!col) return null;
    cols.push(col);
  }
  return a.map((_, i) => cols.map((c) => c[i]));
}

/** `covariates` are columns (use a column of ones for an intercept, or pass `intercept: true`). */
export function logisticFit(
  y: Uint8Array,
  covariates: Float64Array[],
  options: { offset?: Float64Array; intercept?: boolean; start?: number[]; maxIterations?: number } = {},
): FitResult<LogisticFit> {
  const n = y.length;
  const withIntercept = options.intercept ?? false;
  const k = covariates.length + (withIntercept ? 1 : 0);
  const offset = options.offset;
  const beta = options.start ? [...options.start] : new Array(k).fill(0);
  const maxIt = options.maxIterations ?? 100;
  const col = (j: number, i: number) => (withIntercept ? (j === 0 ? 1 : covariates[j - 1][i]) : covariates[j][i]);

  // one pass: log-likelihood, score and information at b; one exp and one log1p per row
  const evaluate = (b: number[]) => {
    let ll = 0;
    const g = new Array(k).fill(0);
    const h = Array.from({ length: k }, () => new Array(k).fill(0));
    let extreme = 0;
    const term = (eta: number) => {
      const e = Math.exp(-(eta < 0 ? -eta : eta));
      const mu = eta >= 0 ? 1 / (1 + e) : e / (1 + e);
      return { e, mu };
    };
    if (withIntercept && k <= 2) {
      // fast path: intercept only, or intercept + one covariate (the calibration fits on a million rows)
      const x = k === 2 ? covariates[0] : null;
      const b0 = b[0];
      const b1 = k === 2 ? b[1] : 0;
      let g0 = 0,
        g1 = 0,
        h00 = 0,
        h01 = 0,
        h11 = 0;
      for (let i = 0; i < n; i++) {
        const xi = x ? x[i] : 0;
        const eta = (offset ? offset[i] : 0) + b0 + b1 * xi;
        const e = Math.exp(eta < 0 ? eta : -eta);
        const inv = 1 / (1 + e);
        const mu = eta >= 0 ? inv : e * inv;
        const w = e * inv * inv;
        if (w < 1e-14) extreme++;
        const yi = y[i];
        ll += -Math.log1p(e) + (yi === 1 ? (eta < 0 ? eta : 0) : eta > 0 ? -eta : 0);
        const r = yi - mu;
        g0 += r;
        h00 += w;
        g1 += r * xi;
        h01 += w * xi;
        h11 += w * xi * xi;
      }
      g[0] = g0;
      h[0][0] = h00;
      if (k === 2) {
        g[1] = g1;
        h[1][0] = h[0][1] = h01;
        h[1][1] = h11;
      }
      return { ll, g, h, extreme };
    }
    for (let i = 0; i < n; i++) {
      let eta = offset ? offset[i] : 0;
      for (let j = 0; j < k; j++) eta += b[j] * col(j, i);
      const { e, mu } = term(eta);
      const w = mu * (1 - mu);
      if (w < 1e-14) extreme++;
      ll += -Math.log1p(e) + (y[i] === 1 ? Math.min(eta, 0) : -Math.max(eta, 0));
      const r = y[i] - mu;
      for (let j = 0; j < k; j++) {
        const xj = col(j, i);
        g[j] += r * xj;
        for (let l = 0; l <= j; l++) h[j][l] += w * xj * col(l, i);
      }
    }
    for (let j = 0; j < k; j++) for (let l = j + 1; l < k; l++) h[j][l] = h[l][j];
    return { ll, g, h, extreme };
  };

  let cur = evaluate(beta);
  for (let it = 1; it <= maxIt; it++) {
    const delta = solve(cur.h, cur.g);
    if (!delta || delta.some((d) => !Number.isFinite(d))) {
      return cur.extreme > 0
        ? {
            converged: false,
            reason: 'separation',
            detail: 'the information matrix became singular as fitted probabilities reached 0 or 1',
          }
        : {
            converged: false,
            reason: 'degenerate',
            detail: 'the information matrix is singular (a covariate without variation?)',
          };
    }
    let stepScale = 1;
    let next = beta.map((b, j) => b + delta[j]);
    let cand = evaluate(next);
    while (cand.ll < cur.ll - 1e-12 * Math.abs(cur.ll) && stepScale > 1e-8) {
      stepScale /= 2;
      next = beta.map((b, j) => b + stepScale * delta[j]);
      cand = evaluate(next);
    }
    const small = delta.every((d, j) => Math.abs(stepScale * d) < 1e-10 * (1 + Math.abs(next[j])));
    for (let j = 0; j < k; j++) beta[j] = next[j];
    cur = cand;
    if (beta.some((b) => Math.abs(b) > 1e6) || (cur.extreme === n && n > 0)) {
      return {
        converged: false,
        reason: 'separation',
        detail: `coefficients diverge (|β| > 10⁶ or every fitted probability at 0 or 1) after ${it} iterations`,
      };
    }
    if (small) {
      const inv = invert(cur.h);
      if (!inv)
        return { converged: false, reason: 'degenerate', detail: 'the information matrix is singular at the optimum' };
      return {
        converged: true,
        coefficients: [...beta],
        se: inv.map((row, j) => Math.sqrt(row[j])),
        covariance: inv,
        logLik: cur.ll,
        iterations: it,
      };
    }
  }
  return {
    converged: false,
    reason: 'non-convergence',
    detail: `Newton–Raphson did not converge in ${maxIt} iterations`,
  };
}
