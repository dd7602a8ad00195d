/**
 * Control limits for observed − expected (O − E) and O/E per period, widening as a period gets smaller.
 *   Under the score (H0: outcomes ~ Bernoulli(p_i)), O − E has mean 0 and variance V = Σ p_i(1 − p_i);
 *   limits O − E = ±z·√V and O/E = 1 ± z·√V / E, with z = 1.960 (95%) and z = 3.090 (99.8%).
 * Source: Spiegelhalter DJ (2005). Funnel plots for comparing institutional performance. Stat Med 24:1185–1202
 *   (normal approximation to the exact binomial-type limits; 95% and 99.8% as "warning" and "alarm" lines).
 * Choice: normal approximation with the patient-level variance Σp(1−p) (no overdispersion adjustment); a period
 * beyond the 99.8% limit counts as "outside" for the 'oe-limit' alert rule, beyond 95% as "warning".
 */

export const Z95 = 1.959963984540054;
export const Z998 = 3.090232306167813;

export interface PeriodLimits {
  observed: number;
  expected: number;
  variance: number;
  oMinusE: number;
  oe: number;
  limits95: { oMinusE: [number, number]; oe: [number, number] };
  limits998: { oMinusE: [number, number]; oe: [number, number] };
  status: 'inside' | 'warning' | 'outside';
}

/** Limits from the period's observed count, expected count Σp and variance Σp(1−p). */
export function funnelLimits(observed: number, expected: number, variance: number): PeriodLimits {
  const sd = Math.sqrt(variance);
  const lim = (z: number) => ({
    oMinusE: [-z * sd, z * sd] as [number, number],
    oe: [Math.max(0, 1 - (z * sd) / expected), 1 + (z * sd) / expected] as [number, number],
  });
  const d = observed - expected;
  const status = Math.abs(d) > Z998 * sd ? 'outside' : Math.abs(d) > Z95 * sd ? 'warning' : 'inside';
  return {
    observed,
    expected,
    variance,
    oMinusE: d,
    oe: expected > 0 ? observed / expected : NaN,
    limits95: lim(Z95),
    limits998: lim(Z998),
    status,
  };
}

/** Sums a group of patients' p and y into funnelLimits. */
export function funnelLimitsFor(p: ArrayLike<number>, y: ArrayLike<number>): PeriodLimits {
  let o = 0;
  let e = 0;
  let v = 0;
  for (let i = 0; i < p.length; i++) {
    o += y[i];
    e += p[i];
    v += p[i] * (1 - p[i]);
  }
  return funnelLimits(o, e, v);
}
