/**
 * Student t quantile for Rubin's-rules intervals: the p-quantile of t with ν degrees of freedom (ν may be fractional).
 * Upper tail P(T > t) = ½·I_{ν/(ν+t²)}(ν/2, ½), the regularized incomplete beta by its continued fraction (Press WH
 * et al. (2007) Numerical Recipes, 3rd ed., §6.4), solved for t by Newton's method from the normal quantile; for
 * ν > 10⁴ the Cornish–Fisher series of Abramowitz M, Stegun IA (1964) Handbook of Mathematical Functions, 26.7.5
 * (four terms, error far below 1e-15 there). The normal quantile is simple-statistics' probit refined by Newton steps on
 * Φ from distributions.ts. Checked against R's qt in tests/reference/multipleImputationR.test.ts and metaAnalysisR.test.ts.
 */
import { probit } from 'simple-statistics';
import { logGamma, normalTwoSided } from './distributions';

/** Φ⁻¹(p) to full double precision. */
export function normalQuantile(p: number): number {
  if (!(p > 0 && p < 1)) return p === 0 ? -Infinity : p === 1 ? Infinity : NaN;
  let z = probit(p);
  for (let i = 0; i < 3; i++) {
    const upper = normalTwoSided(z) / 2; // P(Z > |z|)
    const cdf = z >= 0 ? 1 - upper : upper;
    const step = (cdf - p) / (Math.exp(-0.5 * z * z) / Math.sqrt(2 * Math.PI));
    z -= step;
    if (Math.abs(step) < 1e-15 * (1 + Math.abs(z))) break;
  }
  return z;
}

function betaFraction(a: number, b: number, x: number): number {
  const tiny = 1e-300;
  let c = 1;
  let d = 1 - ((a + b) * x) / (a + 1);
  if (Math.abs(d) < tiny) d = tiny;
  d = 1 / d;
  let h = d;
  for (let m = 1; m < 100_000; m++) {
    const m2 = 2 * m;
    let aa = (m * (b - m) * x) / ((a + m2 - 1) * (a + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    h *= d * c;
    aa = (-(a + m) * (a + b + m) * x) / ((a + m2) * (a + m2 + 1));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < 1e-16) break;
  }
  return h;
}

/** Regularized incomplete beta I_x(a, b). */
export function incompleteBeta(x: number, a: number, b: number): number {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  const front = Math.exp(logGamma(a + b) - logGamma(a) - logGamma(b) + a * Math.log(x) + b * Math.log1p(-x));
  return x < (a + 1) / (a + b + 2) ? (front * betaFraction(a, b, x)) / a : 1 - (front * betaFraction(b, a, 1 - x)) / b;
}

/** ln Γ(a + ½) − ln Γ(a); for large a from Stirling's series, so the two large log-gammas do not cancel. */
function logGammaRatioHalf(a: number): number {
  if (a < 50) return logGamma(a + 0.5) - logGamma(a);
  const s = (x: number) => 1 / (12 * x) - 1 / (360 * x ** 3) + 1 / (1260 * x ** 5) - 1 / (1680 * x ** 7);
  return 0.5 * Math.log(a) + a * Math.log1p(1 / (2 * a)) - 0.5 + s(a + 0.5) - s(a);
}

/** P(T > t) for t ≥ 0, with ln x and ln(1 − x) taken without rounding x = ν/(ν + t²) first. */
function tUpper(t: number, df: number): number {
  const a = df / 2;
  const t2 = t * t;
  const x = df / (df + t2);
  const y = t2 / (df + t2);
  const front = Math.exp(logGammaRatioHalf(a) - 0.5723649429247001 - a * Math.log1p(t2 / df) + 0.5 * Math.log(y)); // ln Γ(½) = ln √π
  return (
    0.5 *
    (x < (a + 1) / (a + 1.5) ? (front * betaFraction(a, 0.5, x)) / a : 1 - (front * betaFraction(0.5, a, y)) / 0.5)
  );
}

function tDensity(t: number, df: number): number {
  return Math.exp(logGammaRatioHalf(df / 2) - 0.5 * Math.log(df * Math.PI) - ((df + 1) / 2) * Math.log1p((t * t) / df));
}

export function tQuantile(p: number, df: number): number {
  if (!(df > 0)) return NaN;
  if (p === 0.5) return 0;
  if (p < 0.5) return -tQuantile(1 - p, df);
  const z = normalQuantile(p);
  if (df === Infinity) return z;
  const z2 = z * z;
  const series =
    z +
    (z * (z2 + 1)) / 4 / df +
    (z * ((5 * z2 + 16) * z2 + 3)) / 96 / df ** 2 +
    (z * (((3 * z2 + 19) * z2 + 17) * z2 - 15)) / 384 / df ** 3 +
    (z * ((((79 * z2 + 776) * z2 + 1482) * z2 - 1920) * z2 - 945)) / 92160 / df ** 4;
  if (df > 1e4) return series;
  let t = df < 1 ? Math.max(series, 1) : series;
  for (let i = 0; i < 100; i++) {
    const f = tUpper(t, df) - (1 - p);
    const step = f / tDensity(t, df);
    let next = t + step;
    if (!(next > 0)) next = t / 2; // Newton can overshoot below 0 in the heavy tails of small ν
    if (Math.abs(next - t) < 1e-14 * (1 + t)) return next;
    t = next;
  }
  return t;
}
