/**
 * Risk-adjusted CUSUM of log-likelihood-ratio weights (Bernoulli outcomes with predicted risk p).
 *   W_t = y_t·log(RA) − log(1 − p_t + RA·p_t);  X_t = max(0, X_{t−1} + W_t); signal when X_t ≥ h, then X_t := 0.
 * Source: Steiner SH, Cook RJ, Farewell VT, Treasure T (2000). Monitoring surgical performance using risk-adjusted
 * cumulative sum charts. Biostatistics 1:441–452 (weight for R0 = 1; RA = 2, h ≈ 4.5 in their example [mem]).
 * Choices: RA > 1 tests deterioration (odds of the outcome multiplied by RA). RA < 1 (e.g. 0.5) tests improvement
 * with the same weight formula run as its own upper chart X_t = max(0, X_{t−1} + W_t(RA)); for plotting we report it
 * as Z_t = −X_t (a lower chart, equivalent to Z_t = min(0, Z_{t−1} − W_t)), signal when Z_t ≤ −h.
 * Reset to 0 after each signal (Steiner et al. restart the chart). Signals are exact; only the plotted series is
 * downsampled (every k-th point plus every signal and the last point).
 */

export interface CusumSignal {
  index: number; // 0-based patient position in time order
  value: number; // chart value at the signal, before reset
}

export interface CusumResult {
  oddsRatio: number;
  h: number;
  direction: 'deterioration' | 'improvement';
  n: number;
  signals: CusumSignal[];
  /** Plot series: patient position and chart value (after any reset); improvement chart shown as ≤ 0. */
  series: { index: number; value: number }[];
  finalValue: number;
  maxValue: number;
}

/** LLR weight of one patient for the alternative odds ratio RA against RA = 1. */
export function cusumWeight(p: number, y: number, oddsRatio: number): number {
  return (y === 1 ? Math.log(oddsRatio) : 0) - Math.log(1 - p + oddsRatio * p);
}

export function riskAdjustedCusum(
  p: ArrayLike<number>,
  y: ArrayLike<number>,
  options: { oddsRatio?: number; h?: number; maxPoints?: number } = {},
): CusumResult {
  const ra = options.oddsRatio ?? 2;
  const h = options.h ?? 4.5;
  if (!(ra > 0) || ra === 1) throw new RangeError('the alternative odds ratio must be positive and not 1');
  if (!(h > 0)) throw new RangeError('the decision threshold h must be positive');
  const n = p.length;
  const sign = ra > 1 ? 1 : -1;
  const step = Math.max(1, Math.ceil(n / (options.maxPoints ?? 2000)));
  const signals: CusumSignal[] = [];
  const series: { index: number; value: number }[] = [];
  let x = 0;
  let maxValue = 0;
  for (let t = 0; t < n; t++) {
    x = Math.max(0, x + cusumWeight(p[t], y[t], ra));
    maxValue = Math.max(maxValue, x);
    let signalled = false;
    if (x >= h) {
      signals.push({ index: t, value: sign * x });
      series.push({ index: t, value: sign * x });
      x = 0;
      signalled = true;
    }
    if (signalled || t % step === 0 || t === n - 1) series.push({ index: t, value: sign * x });
  }
  return {
    oddsRatio: ra,
    h,
    direction: ra > 1 ? 'deterioration' : 'improvement',
    n,
    signals,
    series,
    finalValue: sign * x,
    maxValue: sign * maxValue,
  };
}
