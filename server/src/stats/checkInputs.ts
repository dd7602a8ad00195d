/**
 * Input checks before any metric: outcomes must be 0 or 1, probabilities finite and within [0, 1], the two arrays the
 * same length, not empty, and both outcome classes present (AUC and every calibration fit need events and non-events).
 * Rows are numbered from 1 in the order given. Probabilities of exactly 0 or 1 are allowed, counted and reported:
 * metrics on the logit or log scale use p clamped to [1e-15, 1 − 1e-15] (the same ε as scikit-learn's log_loss),
 * which the result states in `extremeProbabilities.handling` and in a warning — never silently.
 * Source: common practice, no source (the ε follows scikit-learn 1.2 `log_loss(eps=1e-15)`).
 */

export const P_CLAMP = 1e-15;

export type InputCheck =
  | { ok: true; zeros: number; ones: number }
  | { ok: false; row: number | null; field: 'outcome' | 'prediction' | null; message: string };

export function checkInputs(p: ArrayLike<number>, y: ArrayLike<number>): InputCheck {
  if (p.length !== y.length)
    return {
      ok: false,
      row: null,
      field: null,
      message: `predictions (${p.length}) and outcomes (${y.length}) differ in length`,
    };
  if (p.length === 0) return { ok: false, row: null, field: null, message: 'no rows: the cohort is empty' };
  let zeros = 0;
  let ones = 0;
  let events = 0;
  for (let i = 0; i < p.length; i++) {
    const yi = y[i];
    if (yi !== 0 && yi !== 1)
      return { ok: false, row: i + 1, field: 'outcome', message: `row ${i + 1}: outcome must be 0 or 1, got ${yi}` };
    const pi = p[i];
    if (Number.isNaN(pi))
      return {
        ok: false,
        row: i + 1,
        field: 'prediction',
        message: `row ${i + 1}: predicted probability is not a number`,
      };
    if (!(pi >= 0 && pi <= 1))
      return {
        ok: false,
        row: i + 1,
        field: 'prediction',
        message: `row ${i + 1}: predicted probability ${pi} is outside [0, 1]`,
      };
    if (pi === 0) zeros++;
    else if (pi === 1) ones++;
    events += yi;
  }
  if (events === 0)
    return {
      ok: false,
      row: null,
      field: 'outcome',
      message: 'no events (every outcome is 0): discrimination and calibration cannot be estimated',
    };
  if (events === p.length)
    return {
      ok: false,
      row: null,
      field: 'outcome',
      message: 'no non-events (every outcome is 1): discrimination and calibration cannot be estimated',
    };
  return { ok: true, zeros, ones };
}

/** An input the engine refuses; `row` is 1-based within the arrays, or null when the problem is not one row. */
export class EngineInputError extends Error {
  constructor(
    message: string,
    readonly row: number | null,
    readonly field: string | null,
  ) {
    super(message);
    this.name = 'EngineInputError';
  }
}

/** logit(p) with p clamped to [P_CLAMP, 1 − P_CLAMP]. */
export function clampedLogit(p: Float64Array): Float64Array {
  const out = new Float64Array(p.length);
  const hi = 1 - P_CLAMP;
  for (let i = 0; i < p.length; i++) {
    const q = p[i] < P_CLAMP ? P_CLAMP : p[i] > hi ? hi : p[i];
    out[i] = Math.log(q / (1 - q));
  }
  return out;
}
