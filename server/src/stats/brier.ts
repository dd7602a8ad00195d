/**
 * Brier score = mean (p − y)²; scaled Brier = 1 − Brier / (ȳ(1 − ȳ)), the Brier score relative to a model that
 * predicts the observed event rate for everyone.
 * Sources: Brier GW (1950) Monthly Weather Review 78:1–3; scaled form: Steyerberg EW et al. (2010) Epidemiology
 * 21:128–138. Choice: ȳ is the validation cohort's own event rate.
 */

export function brier(p: Float64Array, y: Uint8Array): { brier: number; scaled: number } {
  let s = 0;
  let events = 0;
  for (let i = 0; i < p.length; i++) {
    const d = p[i] - y[i];
    s += d * d;
    events += y[i];
  }
  const b = s / p.length;
  const rate = events / p.length;
  return { brier: b, scaled: 1 - b / (rate * (1 - rate)) };
}
