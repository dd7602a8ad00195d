/**
 * Loess smoother of y on p: at x0, a weighted least-squares quadratic in (p − x0) over the q = ⌊span·n⌋ nearest rows,
 * tricube weights w = (1 − (d/h)³)³ with h the distance to the q-th nearest row; the fitted value at x0 is the
 * local intercept. No robustness iterations (family "gaussian"): those down-weight every event in 0/1 data.
 * Sources: Cleveland WS, Devlin SJ (1988) JASA 83:596–610; as used for calibration curves by Austin PC,
 * Steyerberg EW (2019) Stat Med 38:4051–4065 (R loess(y ~ p) defaults: span 0.75, degree 2).
 * Choices: evaluated directly ("exact", like R's surface = "direct") at every distinct p when n ≤ exactMaxN (default
 * 5,000); above that, evaluated directly on a grid of `gridSize` (default 100) points at quantiles of p and linearly
 * interpolated between them (R's default "interpolate" surface uses a k-d tree with cubic blending — ours differs, so
 * the reference test compares with "direct"). Span > 1 widens h by the factor span, as R does for one predictor.
 * Where fewer than three distinct p carry weight the local fit drops to a line, then to a weighted mean.
 */
import { lowerBound, quantileType7, upperBound, type SortedCohort } from './sortedCohort';

export interface LoessOptions {
  span: number;
  exactMaxN?: number;
  gridSize?: number;
}

function solve3(a: number[], b: number[]): number[] | null {
  // symmetric 3×3 [a0 a1 a2; a1 a2 a3; a2 a3 a4] handled by general elimination
  const m = [
    [a[0], a[1], a[2], b[0]],
    [a[1], a[2], a[3], b[1]],
    [a[2], a[3], a[4], b[2]],
  ];
  for (let c = 0; c < 3; c++) {
    let piv = c;
    for (let r = c + 1; r < 3; r++) if (Math.abs(m[r][c]) > Math.abs(m[piv][c])) piv = r;
    if (Math.abs(m[piv][c]) < 1e-12 * Math.abs(a[0])) return null;
    [m[c], m[piv]] = [m[piv], m[c]];
    for (let r = 0; r < 3; r++) {
      if (r === c) continue;
      const f = m[r][c] / m[c][c];
      for (let j = c; j < 4; j++) m[r][j] -= f * m[c][j];
    }
  }
  return [m[0][3] / m[0][0], m[1][3] / m[1][1], m[2][3] / m[2][2]];
}

/** Distance from x0 to its q-th nearest row (rows are s.p, ascending). */
function bandwidth(s: SortedCohort, x0: number, q: number): number {
  const P = s.p;
  const n = s.n;
  if (q >= n) return Math.max(x0 - P[0], P[n - 1] - x0);
  // f(st) = P[st] + P[st+q−1] − 2·x0 is non-decreasing; the best window starts where it turns non-negative
  let lo = 0;
  let hi = n - q;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (P[mid] + P[mid + q - 1] - 2 * x0 >= 0) hi = mid;
    else lo = mid + 1;
  }
  let h = Math.max(x0 - P[lo], P[lo + q - 1] - x0);
  if (lo > 0) h = Math.min(h, Math.max(x0 - P[lo - 1], P[lo + q - 2] - x0));
  return h;
}

/** The loess fit at one point x0. */
export function loessAt(s: SortedCohort, x0: number, span: number): number {
  const q = Math.max(1, Math.min(s.n, Math.floor(s.n * span)));
  let h = bandwidth(s, x0, q);
  if (span > 1) h *= span;
  const gv = s.groupValue;
  const ge = s.groupEvents;
  const gt = s.groupTotal;
  if (!(h > 0)) {
    // the q nearest rows all sit at x0: their observed proportion
    const k = lowerBound(gv, x0);
    return ge[k] / gt[k];
  }
  const from = upperBound(gv, x0 - h);
  const to = lowerBound(gv, x0 + h);
  let s0 = 0,
    s1 = 0,
    s2 = 0,
    s3 = 0,
    s4 = 0,
    t0 = 0,
    t1 = 0,
    t2 = 0;
  const invH = 1 / h;
  // rows strictly inside (x0 − h, x0 + h) all carry positive weight
  const distinct = to - from;
  for (let k = from; k < to; k++) {
    const u = (gv[k] - x0) * invH;
    const au = u < 0 ? -u : u;
    const c = 1 - au * au * au;
    const w = c * c * c;
    const wn = w * gt[k];
    const we = w * ge[k];
    const u2 = u * u;
    s0 += wn;
    s1 += wn * u;
    s2 += wn * u2;
    s3 += wn * u2 * u;
    s4 += wn * u2 * u2;
    t0 += we;
    t1 += we * u;
    t2 += we * u2;
  }
  if (distinct >= 3) {
    const beta = solve3([s0, s1, s2, s3, s4], [t0, t1, t2]);
    if (beta) return beta[0];
  }
  if (distinct >= 2) {
    const det = s0 * s2 - s1 * s1;
    if (Math.abs(det) > 1e-12 * s0 * s2) return (t0 * s2 - s1 * t1) / det;
  }
  return t0 / s0;
}

export interface LoessCurve {
  /** smoothed observed risk at each distinct p (s.groupValue order). */
  atGroups: Float64Array;
  /** a plotting curve on up to gridSize points at quantiles of p. */
  plot: { p: number[]; observed: number[] };
  evaluation: string;
}

export function loessCurve(s: SortedCohort, options: LoessOptions): LoessCurve {
  const exactMaxN = options.exactMaxN ?? 5000;
  const gridSize = options.gridSize ?? 100;
  const grid: number[] = [];
  for (let k = 0; k < gridSize; k++) {
    const v = quantileType7(s.p, k / (gridSize - 1));
    if (grid.length === 0 || v > grid[grid.length - 1]) grid.push(v);
  }
  const gridFit = grid.map((x) => loessAt(s, x, options.span));
  const atGroups = new Float64Array(s.groups);
  let evaluation: string;
  if (s.n <= exactMaxN) {
    for (let k = 0; k < s.groups; k++) atGroups[k] = loessAt(s, s.groupValue[k], options.span);
    evaluation = `direct evaluation at each of ${s.groups} distinct predicted risks (n ≤ ${exactMaxN})`;
  } else {
    let j = 0;
    for (let k = 0; k < s.groups; k++) {
      const x = s.groupValue[k];
      while (j < grid.length - 2 && x > grid[j + 1]) j++;
      if (grid.length === 1) atGroups[k] = gridFit[0];
      else {
        const t = (x - grid[j]) / (grid[j + 1] - grid[j]);
        atGroups[k] = gridFit[j] + t * (gridFit[j + 1] - gridFit[j]);
      }
    }
    evaluation = `direct evaluation on ${grid.length} points at quantiles of p, linear interpolation between them (n > ${exactMaxN})`;
  }
  return { atGroups, plot: { p: grid, observed: gridFit }, evaluation };
}
