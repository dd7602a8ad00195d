/**
 * Cross-entropy (log loss), natural log: total = −Σ [y ln p + (1−y) ln(1−p)], mean = total / n.
 * Source: Good IJ (1952) Rational decisions. J R Stat Soc B 14:107–114 (logarithmic scoring rule).
 * Choice: p clamped to [1e-15, 1 − 1e-15] as scikit-learn's log_loss does, so a confident wrong prediction of exactly
 * 0 or 1 costs ln(1e15) ≈ 34.5 instead of infinity; the engine reports how many rows were clamped.
 */
import { P_CLAMP } from './checkInputs';

export function logLoss(p: Float64Array, y: Uint8Array): { mean: number; total: number } {
  const hi = 1 - P_CLAMP;
  let total = 0;
  for (let i = 0; i < p.length; i++) {
    const q = p[i] < P_CLAMP ? P_CLAMP : p[i] > hi ? hi : p[i];
    total -= y[i] === 1 ? Math.log(q) : Math.log1p(-q);
  }
  return { mean: total / p.length, total };
}
