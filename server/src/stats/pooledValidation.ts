/**
 * Validation of a score on a cohort with gaps in its predictors, two analyses side by side:
 *  - complete cases: rows with every model predictor observed (the count left out is reported);
 *  - multiple imputation: the full metric set (fullSet.ts) on each of m completed data sets (chainedImputation.ts),
 *    pooled by Rubin's rules (rubinsRules.ts) on the scale where each metric is closest to normal — AUC on the logit
 *    scale, O/E on the log scale, calibration intercept and slope as they are (Marshall A et al. (2009) BMC Med Res
 *    Methodol 9:57); metrics without a per-data-set standard error (Brier, log loss, ICI…) are averaged over the m sets.
 * Source for the design: Hoogland J et al. (2020) Handling missing predictor values when validating and applying a
 * prediction model to new patients, Stat Med 39:3591–3607 (impute with the outcome in the model, then pool).
 * Computed in-process, one chain after another: each chain is a pure function of (data, settings, chain number), so a
 * thread pool can share them out without changing any result.
 */
import type { ScoreModel } from '@shared/model';
import type { ValidationResult, ValidationSettings } from '@shared/validation';
import { rcsTerm } from './applyModel';
import { EngineInputError } from './checkInputs';
import { checkImputationInput, imputeOnce, type ImputationColumn, type ImputationSettings } from './chainedImputation';
import { Z975 } from './distributions';
import { computeFullSet, resolveSettings } from './fullSet';
import { poolMetric, type PooledMetric } from './rubinsRules';

/** A predictor column: numbers (NaN a gap), or level indices with their texts for a categorical column. */
export interface CohortColumn extends ImputationColumn {
  levelNames?: string[];
}

/** Risk of each row from the model and complete columns; `rows` restricts to a subset (complete cases). */
export function riskFromColumns(
  model: ScoreModel,
  columns: Record<string, CohortColumn>,
  values: Record<string, Float64Array>,
  rows?: Uint32Array,
): Float64Array {
  const n = rows ? rows.length : (Object.values(values)[0]?.length ?? 0);
  const p = new Float64Array(n);
  for (let r = 0; r < n; r++) {
    const i = rows ? rows[r] : r;
    let lp = model.intercept;
    for (const pred of model.predictors) {
      const col = columns[pred.column];
      const v = values[pred.column][i];
      let x: number;
      if (pred.transform === 'indicator') x = (col.levelNames ? col.levelNames[v] : String(v)) === pred.level ? 1 : 0;
      else if (pred.transform === 'log') {
        if (!(v > 0))
          throw new EngineInputError(`column ${pred.column} must be positive for a natural log, got ${v}`, i, null);
        x = Math.log(v);
      } else if (pred.transform === 'rcs') x = rcsTerm(v, pred.knots!, pred.term!);
      else x = v;
      lp += pred.coefficient * x;
    }
    p[r] = 1 / (1 + Math.exp(-lp));
  }
  return p;
}

export interface PooledAnalysis {
  imputations: number;
  iterations: number;
  seed: number;
  donors: number;
  /** Rubin's rules, per metric that has a per-data-set variance; null where a fit failed in some completed set */
  pooled: {
    auc: PooledMetric;
    calibrationIntercept: PooledMetric | null;
    calibrationSlope: PooledMetric | null;
    oe: PooledMetric;
  };
  /** completed sets in which the calibration fits failed */
  failedFits: { calibrationIntercept: number; calibrationSlope: number };
  perImputation: ValidationResult[];
}

export interface MissingDataValidation {
  n: number;
  rowsWithGaps: number;
  gapsByColumn: Record<string, number>;
  completeCase: { n: number; leftOut: number; result: ValidationResult | null; refused: string | null };
  imputed: PooledAnalysis;
}

export const seLogOe = (r: ValidationResult) => (Math.log(r.oe.upper) - Math.log(r.oe.lower)) / (2 * Z975);

export function poolResults(results: ValidationResult[]): Pick<PooledAnalysis, 'pooled' | 'failedFits'> {
  const fits = (key: 'calibrationIntercept' | 'calibrationSlope') => {
    const ok = results.map((r) => r[key]).filter((f) => f.converged);
    const failed = results.length - ok.length;
    return {
      failed,
      pooled:
        failed === 0
          ? poolMetric(
              ok.map((f) => f.estimate),
              ok.map((f) => f.se),
              'identity',
            )
          : null,
    };
  };
  const ci = fits('calibrationIntercept');
  const cs = fits('calibrationSlope');
  return {
    pooled: {
      auc: poolMetric(
        results.map((r) => r.auc.estimate),
        results.map((r) => r.auc.se),
        'logit',
      ),
      calibrationIntercept: ci.pooled,
      calibrationSlope: cs.pooled,
      oe: poolMetric(
        results.map((r) => r.oe.estimate),
        // poolMetric takes standard errors on the metric's own scale: SE(O/E) = O/E · SE(log O/E) by the delta method
        results.map((r) => seLogOe(r) * r.oe.estimate),
        'log',
      ),
    },
    failedFits: { calibrationIntercept: ci.failed, calibrationSlope: cs.failed },
  };
}

/**
 * Both analyses. `columns` are the model's predictor columns (NaN / level gaps), `extra` complete columns that only
 * inform the imputation models (subgroup, period…).
 */
export function validateWithGaps(
  model: ScoreModel,
  y: Uint8Array,
  columns: CohortColumn[],
  imputation: ImputationSettings,
  validation: Partial<ValidationSettings> = {},
  extra: CohortColumn[] = [],
  onImputation?: (done: number) => void,
): MissingDataValidation {
  const settings = resolveSettings({ ...validation, bootstrapReplicates: 0 });
  const n = y.length;
  const byName = Object.fromEntries(columns.map((c) => [c.name, c]));
  for (const pred of model.predictors)
    if (!byName[pred.column]) throw new EngineInputError(`the model needs column ${pred.column}`, null, null);
  checkImputationInput({ outcome: y, columns, extra });
  const gapsByColumn = Object.fromEntries(
    columns.map((c) => [c.name, c.values.reduce((s, v) => s + (Number.isNaN(v) ? 1 : 0), 0)]),
  );
  const complete: number[] = [];
  for (let i = 0; i < n; i++) if (columns.every((c) => !Number.isNaN(c.values[i]))) complete.push(i);
  const rows = Uint32Array.from(complete);
  const observedValues = Object.fromEntries(columns.map((c) => [c.name, c.values]));
  let ccResult: ValidationResult | null = null;
  let refused: string | null = null;
  try {
    ccResult = computeFullSet(
      riskFromColumns(model, byName, observedValues, rows),
      Uint8Array.from(rows, (i) => y[i]),
      settings,
    );
  } catch (e) {
    if (!(e instanceof EngineInputError)) throw e;
    refused = e.message; // e.g. no events left among complete cases
  }
  const perImputation: ValidationResult[] = [];
  for (let l = 0; l < imputation.imputations; l++) {
    const completed = imputeOnce({ outcome: y, columns, extra }, imputation, l);
    const values = Object.fromEntries(columns.map((c, j) => [c.name, completed[j]]));
    perImputation.push(computeFullSet(riskFromColumns(model, byName, values), y, settings));
    onImputation?.(l + 1);
  }
  return {
    n,
    rowsWithGaps: n - rows.length,
    gapsByColumn,
    completeCase: { n: rows.length, leftOut: n - rows.length, result: ccResult, refused },
    imputed: {
      imputations: imputation.imputations,
      iterations: imputation.iterations,
      seed: imputation.seed,
      donors: imputation.donors,
      ...poolResults(perImputation),
      perImputation,
    },
  };
}
