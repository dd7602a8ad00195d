/**
 * Applies a published logistic score to predictor columns: logit(p) = intercept + Σ coefficient · f(column), p = expit.
 * Transforms: linear f(x) = x; log f(x) = ln x (refuses x ≤ 0, naming the row); indicator f(x) = 1 if the text equals
 * `level`, else 0; rcs = one nonlinear term of a restricted cubic spline.
 * Spline: Harrell FE (2015) Regression Modeling Strategies, 2nd ed., Springer, §2.4.5, with knots t1 < … < tk,
 *   term j (1 … k−2): (x−tj)³₊ − (x−t_{k−1})³₊ (tk−tj)/(tk−t_{k−1}) + (x−tk)³₊ (t_{k−1}−tj)/(tk−t_{k−1}),
 * divided by (tk − t1)² — the normalisation of Hmisc `rcspline.eval(norm = 2)`, which `rms` uses, so published rms
 * coefficients apply unchanged. The linear part of a spline is an ordinary `linear` predictor on the same column.
 * Pure: columns come in as arrays of text (as read from a CSV), no I/O.
 */
import type { Predictor, ScoreModel } from '@shared/model';
import { parseDecimal } from '@shared/decimal';

export type ApplyResult =
  | { ok: true; p: Float64Array; linearPredictor: Float64Array }
  | { ok: false; row: number; column: string; message: string };

export function rcsTerm(x: number, knots: readonly number[], term: number): number {
  const k = knots.length;
  const tj = knots[term - 1];
  const tk1 = knots[k - 2];
  const tk = knots[k - 1];
  const cube = (v: number) => (v > 0 ? v * v * v : 0);
  const raw = cube(x - tj) - (cube(x - tk1) * (tk - tj)) / (tk - tk1) + (cube(x - tk) * (tk1 - tj)) / (tk - tk1);
  return raw / ((tk - knots[0]) * (tk - knots[0]));
}

function predictorValue(pred: Predictor, text: string | undefined, row: number): number | string {
  if (pred.transform === 'indicator') return text?.trim() === pred.level ? 1 : 0;
  if (text === undefined || text.trim() === '') return `row ${row}: column ${pred.column} is empty`;
  const x = parseDecimal(text);
  if (!Number.isFinite(x)) return `row ${row}: column ${pred.column} is not a decimal number (${JSON.stringify(text)})`;
  switch (pred.transform) {
    case 'linear':
      return x;
    case 'log':
      if (x <= 0) return `row ${row}: column ${pred.column} must be positive for a natural log, got ${x}`;
      return Math.log(x);
    case 'rcs':
      return rcsTerm(x, pred.knots!, pred.term!);
  }
}

/** The linear predictor of one row; `value(column)` gives that row's text; `row` (1-based) is for messages. */
export function linearPredictorRow(
  model: ScoreModel,
  value: (column: string) => string | undefined,
  row: number,
): number | { column: string; message: string } {
  let lp = model.intercept;
  for (const pred of model.predictors) {
    const v = predictorValue(pred, value(pred.column), row);
    if (typeof v === 'string') return { column: pred.column, message: v };
    lp += pred.coefficient * v;
  }
  return lp;
}

/** `columns[name][i]` is the text of row i (0-based) in column `name`; rows in messages are 1-based. */
export function applyModel(model: ScoreModel, columns: Record<string, ArrayLike<string>>, n: number): ApplyResult {
  for (const pred of model.predictors) {
    if (!columns[pred.column])
      return {
        ok: false,
        row: 0,
        column: pred.column,
        message: `the model needs column ${pred.column}, which the data lack`,
      };
  }
  const lp = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const v = linearPredictorRow(model, (c) => columns[c][i], i + 1);
    if (typeof v !== 'number') return { ok: false, row: i + 1, ...v };
    lp[i] = v;
  }
  const p = new Float64Array(n);
  for (let i = 0; i < n; i++) p[i] = 1 / (1 + Math.exp(-lp[i]));
  return { ok: true, p, linearPredictor: lp };
}
