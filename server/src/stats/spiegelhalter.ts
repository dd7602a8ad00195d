/**
 * Spiegelhalter's z: Z = Σ (y − p)(1 − 2p) / sqrt(Σ (1 − 2p)² p (1 − p)), two-sided normal p-value.
 * Source: Spiegelhalter DJ (1986) Probabilistic prediction in patient management and clinical trials. Stat Med
 * 5:421–433. Choice: uses p as given (no clamping needed); a zero denominator (every p in {0, ½, 1}) gives NaN and
 * the caller warns.
 */
import { normalTwoSided } from './distributions';

export function spiegelhalter(p: Float64Array, y: Uint8Array): { z: number; pValue: number } {
  let num = 0;
  let den = 0;
  for (let i = 0; i < p.length; i++) {
    const a = 1 - 2 * p[i];
    num += (y[i] - p[i]) * a;
    den += a * a * p[i] * (1 - p[i]);
  }
  if (!(den > 0)) return { z: NaN, pValue: NaN };
  const z = num / Math.sqrt(den);
  return { z, pValue: normalTwoSided(z) };
}
