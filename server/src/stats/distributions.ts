/**
 * Tail probabilities used by the tests in the engine: standard normal and chi-square.
 * Both come from the regularized incomplete gamma function Q(a, x):
 *   P(|Z| > z) = Q(1/2, z²/2);  P(χ²_df > x) = Q(df/2, x/2).
 * Source: Press WH et al. (2007) Numerical Recipes, 3rd ed., §6.2 (series for x < a+1, Lentz continued fraction otherwise);
 * log-gamma from simple-statistics (gammaln).
 */
import { gammaln } from 'simple-statistics';

/** ln Γ(x) for x > 0: simple-statistics' gammaln (checked against R's lgamma in tests/reference/statsLibrary.test.ts). */
export const logGamma = (x: number): number => gammaln(x);

/** Regularized upper incomplete gamma Q(a, x) = Γ(a, x)/Γ(a). */
export function gammaQ(a: number, x: number): number {
  if (x <= 0) return 1;
  if (x < a + 1) return 1 - gammaPSeries(a, x);
  return gammaQFraction(a, x);
}

function gammaPSeries(a: number, x: number): number {
  let sum = 1 / a;
  let term = sum;
  for (let n = 1; n < 10_000; n++) {
    term *= x / (a + n);
    sum += term;
    if (Math.abs(term) < Math.abs(sum) * 1e-16) break;
  }
  return sum * Math.exp(-x + a * Math.log(x) - logGamma(a));
}

function gammaQFraction(a: number, x: number): number {
  const tiny = 1e-300;
  let b = x + 1 - a;
  let c = 1 / tiny;
  let d = 1 / b;
  let h = d;
  for (let i = 1; i < 10_000; i++) {
    const an = -i * (i - a);
    b += 2;
    d = an * d + b;
    if (Math.abs(d) < tiny) d = tiny;
    c = b + an / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const delta = d * c;
    h *= delta;
    if (Math.abs(delta - 1) < 1e-16) break;
  }
  return Math.exp(-x + a * Math.log(x) - logGamma(a)) * h;
}

/** Two-sided normal p-value P(|Z| ≥ |z|). */
export function normalTwoSided(z: number): number {
  if (!Number.isFinite(z)) return Number.isNaN(z) ? NaN : 0;
  return gammaQ(0.5, (z * z) / 2);
}

/** Upper tail of the chi-square distribution, P(χ²_df ≥ x). */
export function chiSquareUpper(x: number, df: number): number {
  if (df <= 0) return NaN;
  return gammaQ(df / 2, x / 2);
}

/** Φ⁻¹(0.975): the 95% two-sided normal quantile. */
export const Z975 = 1.959963984540054;
