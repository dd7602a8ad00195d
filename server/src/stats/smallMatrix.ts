/**
 * Small dense symmetric matrices (a few dozen rows) for the imputation models: Cholesky factor, inverse and solve.
 * Source: Golub GH, Van Loan CF (2013) Matrix Computations, 4th ed., §4.2 (Cholesky). Matrices are arrays of rows.
 */
export type Matrix = number[][];

/** Lower-triangular L with A = L·Lᵀ, or null when A is not (numerically) positive definite. */
export function cholesky(a: Matrix): Matrix | null {
  const k = a.length;
  const l: Matrix = Array.from({ length: k }, () => new Array(k).fill(0));
  for (let j = 0; j < k; j++) {
    let d = a[j][j];
    for (let s = 0; s < j; s++) d -= l[j][s] * l[j][s];
    if (!(d > 1e-13 * Math.abs(a[j][j])) || !(d > 0)) return null;
    l[j][j] = Math.sqrt(d);
    for (let i = j + 1; i < k; i++) {
      let v = a[i][j];
      for (let s = 0; s < j; s++) v -= l[i][s] * l[j][s];
      l[i][j] = v / l[j][j];
    }
  }
  return l;
}

/** Solves A·x = b given A's Cholesky factor. */
export function choleskySolve(l: Matrix, b: ArrayLike<number>): number[] {
  const k = l.length;
  const z = new Array(k).fill(0);
  for (let i = 0; i < k; i++) {
    let v = b[i];
    for (let s = 0; s < i; s++) v -= l[i][s] * z[s];
    z[i] = v / l[i][i];
  }
  const x = new Array(k).fill(0);
  for (let i = k - 1; i >= 0; i--) {
    let v = z[i];
    for (let s = i + 1; s < k; s++) v -= l[s][i] * x[s];
    x[i] = v / l[i][i];
  }
  return x;
}

export function choleskyInverse(l: Matrix): Matrix {
  const k = l.length;
  const cols = Array.from({ length: k }, (_, j) =>
    choleskySolve(
      l,
      Array.from({ length: k }, (_, i) => (i === j ? 1 : 0)),
    ),
  );
  return Array.from({ length: k }, (_, i) => cols.map((c) => c[i]));
}

/** β + L·z: a draw from N(β, L·Lᵀ) given standard normals z. */
export function addCorrelated(beta: ArrayLike<number>, l: Matrix, z: ArrayLike<number>, scale = 1): number[] {
  return Array.from({ length: beta.length }, (_, i) => {
    let v = 0;
    for (let s = 0; s <= i; s++) v += l[i][s] * z[s];
    return beta[i] + scale * v;
  });
}
