/**
 * O/E ratio = Σy / Σp with 95% CI exp(ln(O/E) ± 1.96·SE), SE(ln O/E) = sqrt((1 − φ) / (n φ)), φ = O/n:
 * the binomial variance of O with E treated as fixed.
 * Source: Riley RD et al. (2021) Stat Med 40:4230–4251 (the formula behind their O/E sample-size criterion);
 * Debray TPA et al. (2017) BMJ 356:i6460. Choice: binomial rather than Poisson (sqrt(1/O)); the two agree for rare
 * outcomes and the binomial one is right when events are common.
 */
import { Z975 } from './distributions';

export const OE_METHOD = 'exp(ln(O/E) ± 1.96·sqrt((1−φ)/(nφ))), φ = O/n (Riley et al. 2021)';

export function observedExpected(p: Float64Array, y: Uint8Array) {
  let o = 0;
  let e = 0;
  for (let i = 0; i < p.length; i++) {
    o += y[i];
    e += p[i];
  }
  return oeFromCounts(o, e, p.length);
}

export function oeFromCounts(observed: number, expected: number, n: number) {
  const ratio = observed / expected;
  const phi = observed / n;
  const se = Math.sqrt((1 - phi) / (n * phi));
  return {
    estimate: ratio,
    lower: ratio * Math.exp(-Z975 * se),
    upper: ratio * Math.exp(Z975 * se),
    observed,
    expected,
    method: OE_METHOD,
    seLog: se,
  };
}
