// The CLI's missing-data path: `--missing complete-case | mi`. Empty predictor cells become gaps (an empty outcome is
// still refused); complete cases are analysed and counted, and with `mi` the score is validated on m completed data
// sets (stats/chainedImputation.ts) pooled by Rubin's rules (stats/rubinsRules.ts), computed in this process.
import type { ScoreModel } from '@shared/model';
import { parseDecimal } from '@shared/decimal';
import { formatNumber } from '@shared/format';
import type { ValidationResult } from '@shared/validation';
import { defaultImputationSettings, IMPUTATION_METHOD, type ImputationSettings } from '../stats/chainedImputation';
import { computeFullSet, resolveSettings } from '../stats/fullSet';
import {
  riskFromColumns,
  validateWithGaps,
  type CohortColumn,
  type MissingDataValidation,
} from '../stats/pooledValidation';
import type { PooledMetric } from '../stats/rubinsRules';
import { CsvInputError } from './readCohortCsv';

export const MISSING_OPTIONS = ['missing', 'imputations', 'iterations', 'seed', 'imputation-columns'];

export interface MissingOptions {
  method: 'complete-case' | 'mi';
  imputation: ImputationSettings;
  extraColumns: string[];
}

/** Reads the missing-data options; `fail` throws the CLI's usage error. */
export function missingOptions(args: Record<string, string>, fail: (message: string) => never): MissingOptions | null {
  if (args.missing === undefined) {
    // --seed also seeds --bootstrap: main.ts checks it has one of the two
    const stray = MISSING_OPTIONS.filter((k) => k !== 'missing' && k !== 'seed' && args[k] !== undefined);
    if (stray.length) fail(`--${stray[0]} needs --missing mi`);
    return null;
  }
  if (args.missing !== 'complete-case' && args.missing !== 'mi') fail('--missing is complete-case or mi');
  if (!args.model)
    fail('--missing needs --model: gaps are in predictor columns, which a --prediction column does not have');
  const int = (name: string, fallback: number, min: number, max: number) => {
    if (args[name] === undefined) return fallback;
    if (args.missing !== 'mi') fail(`--${name} needs --missing mi`);
    const v = Number(args[name]);
    if (!(Number.isInteger(v) && v >= min && v <= max)) fail(`--${name} is a whole number from ${min} to ${max}`);
    return v;
  };
  const extraColumns = args['imputation-columns']
    ? args['imputation-columns']
        .split(',')
        .map((c) => c.trim())
        .filter(Boolean)
    : [];
  if (extraColumns.length && args.missing !== 'mi') fail('--imputation-columns needs --missing mi');
  return {
    method: args.missing as 'complete-case' | 'mi',
    imputation: {
      imputations: int('imputations', defaultImputationSettings.imputations, 2, 1000),
      iterations: int('iterations', defaultImputationSettings.iterations, 1, 100),
      seed: int('seed', defaultImputationSettings.seed, 0, 2 ** 31 - 1),
      donors: defaultImputationSettings.donors,
    },
    extraColumns,
  };
}

/**
 * A column's text as numbers or levels. Categorical when the model uses it as an indicator (or, for an extra column,
 * when some value is not a number): two levels are imputed as binary, more as categorical; a numeric column whose
 * observed values are only 0 and 1 is binary too (logistic imputation), any other numeric column is imputed by PMM.
 */
export function typedColumn(
  name: string,
  text: string[],
  lines: number[],
  file: string,
  categorical: boolean,
  gapsAllowed: boolean,
): CohortColumn {
  const n = text.length;
  const values = new Float64Array(n);
  const isGap = (t: string) => t.trim() === '';
  for (let i = 0; i < n; i++)
    if (!gapsAllowed && isGap(text[i]))
      throw new CsvInputError(file, lines[i], name, 'an imputation column must have a value in every row');
  if (!categorical && !gapsAllowed && text.some((t) => !Number.isFinite(parseDecimal(t)))) categorical = true;
  if (categorical) {
    const levelNames = [...new Set(text.filter((t) => !isGap(t)).map((t) => t.trim()))].sort();
    const code = new Map(levelNames.map((l, k) => [l, k]));
    for (let i = 0; i < n; i++) values[i] = isGap(text[i]) ? NaN : code.get(text[i].trim())!;
    if (levelNames.length < 2) return { name, kind: 'numeric', values, levelNames };
    return {
      name,
      kind: levelNames.length === 2 ? 'binary' : 'categorical',
      levels: levelNames.length,
      values,
      levelNames,
    };
  }
  let binary = true;
  for (let i = 0; i < n; i++) {
    if (isGap(text[i])) {
      values[i] = NaN;
      continue;
    }
    const x = parseDecimal(text[i]);
    if (!Number.isFinite(x))
      throw new CsvInputError(
        file,
        lines[i],
        name,
        `not a decimal number: ${JSON.stringify(text[i])} (leave the cell empty for a missing value)`,
      );
    values[i] = x;
    if (x !== 0 && x !== 1) binary = false;
  }
  return { name, kind: binary ? 'binary' : 'numeric', values };
}

export function modelColumns(model: ScoreModel): string[] {
  return [...new Set(model.predictors.map((q) => q.column))];
}

const mean = (xs: number[]) => xs.reduce((s, v) => s + v, 0) / xs.length;

/**
 * One ValidationResult in the CLI's usual shape for the pooled analysis: AUC, O/E and the calibration intercept and
 * slope from Rubin's rules; every other number the mean over the m completed data sets, its own interval and p-value
 * left out (not estimable by averaging).
 */
export function pooledAsResult(a: MissingDataValidation): ValidationResult {
  const per = a.imputed.perImputation;
  const first = per[0];
  const avg = (f: (r: ValidationResult) => number) => mean(per.map(f));
  const p = a.imputed.pooled;
  const fromPooled = (m: PooledMetric) => ({ estimate: m.estimate, lower: m.estimateLower, upper: m.estimateUpper });
  const unknown = { estimate: NaN, lower: NaN, upper: NaN };
  const fit = (m: PooledMetric | null, failed: number) =>
    m
      ? { converged: true as const, ...fromPooled(m), se: Math.sqrt(m.total) }
      : {
          converged: false as const,
          reason: 'non-convergence' as const,
          detail: `the fit failed in ${failed} of ${per.length} completed data sets`,
        };
  return {
    ...first,
    auc: { ...fromPooled(p.auc), se: Math.sqrt(p.auc.total) * p.auc.estimate * (1 - p.auc.estimate) },
    logLoss: avg((r) => r.logLoss),
    logLossTotal: avg((r) => r.logLossTotal),
    brier: avg((r) => r.brier),
    scaledBrier: avg((r) => r.scaledBrier),
    calibrationIntercept: fit(p.calibrationIntercept, a.imputed.failedFits.calibrationIntercept),
    calibrationSlope: fit(
      p.calibrationSlope,
      a.imputed.failedFits.calibrationSlope,
    ) as ValidationResult['calibrationSlope'],
    oe: { ...first.oe, ...fromPooled(p.oe), expected: avg((r) => r.oe.expected) },
    hosmerLemeshow: { ...first.hosmerLemeshow, statistic: avg((r) => r.hosmerLemeshow.statistic), pValue: NaN },
    spiegelhalter: { z: avg((r) => r.spiegelhalter.z), pValue: NaN },
    ici: avg((r) => r.ici),
    e50: avg((r) => r.e50),
    e90: avg((r) => r.e90),
    emax: avg((r) => r.emax),
    netBenefit: first.netBenefit.map((b, k) => ({ ...b, model: avg((r) => r.netBenefit[k].model) })),
    thresholds: first.thresholds.map((t, k) => ({
      threshold: t.threshold,
      tp: avg((r) => r.thresholds[k].tp),
      fp: avg((r) => r.thresholds[k].fp),
      tn: avg((r) => r.thresholds[k].tn),
      fn: avg((r) => r.thresholds[k].fn),
      sensitivity: { ...unknown, estimate: avg((r) => r.thresholds[k].sensitivity.estimate) },
      specificity: { ...unknown, estimate: avg((r) => r.thresholds[k].specificity.estimate) },
      ppv: { ...unknown, estimate: avg((r) => r.thresholds[k].ppv.estimate) },
      npv: { ...unknown, estimate: avg((r) => r.thresholds[k].npv.estimate) },
    })),
    warnings: [...new Set(per.flatMap((r) => r.warnings))],
  };
}

const pooledJson = (m: PooledMetric | null) =>
  m && {
    estimate: m.estimate,
    lower: m.estimateLower,
    upper: m.estimateUpper,
    scale: m.scale,
    pooledOnScale: m.qbar,
    within: m.within,
    between: m.between,
    total: m.total,
    relativeIncrease: m.riv,
    lambda: m.lambda,
    fmi: m.fmi,
    df: m.df,
  };

export interface GapsAnalysis {
  /** the analysis the CLI's usual keys show */
  main: ValidationResult;
  /** the `missingData` block */
  details: Record<string, unknown>;
  table: string[];
}

/** Both analyses for the CLI; `toJson` is the CLI's own JSON of one result (the complete-case one is shown with it). */
export function analyseGaps(
  file: string,
  model: ScoreModel,
  y: Uint8Array,
  kept: { columns: Record<string, string[]>; lines: number[] },
  options: MissingOptions,
  thresholds: number[] | undefined,
  toJson: (r: ValidationResult) => unknown,
): GapsAnalysis {
  // categorical only where every use of the column is an indicator: a column also used as a number stays numeric
  const indicator = new Set(
    modelColumns(model).filter((c) => model.predictors.every((q) => q.column !== c || q.transform === 'indicator')),
  );
  const columns = modelColumns(model).map((c) =>
    typedColumn(c, kept.columns[c], kept.lines, file, indicator.has(c), true),
  );
  const extra = options.extraColumns.map((c) => typedColumn(c, kept.columns[c], kept.lines, file, false, false));
  const settings = thresholds ? { thresholds } : {};
  const gapsByColumn = Object.fromEntries(
    columns.map((c) => [c.name, c.values.reduce((s, v) => s + (Number.isNaN(v) ? 1 : 0), 0)]),
  );
  if (options.method === 'complete-case') {
    const rows = Uint32Array.from([...y.keys()].filter((i) => columns.every((c) => !Number.isNaN(c.values[i]))));
    const main = computeFullSet(
      riskFromColumns(
        model,
        Object.fromEntries(columns.map((c) => [c.name, c])),
        Object.fromEntries(columns.map((c) => [c.name, c.values])),
        rows,
      ),
      Uint8Array.from(rows, (i) => y[i]),
      resolveSettings(settings),
    );
    const leftOut = y.length - rows.length;
    return {
      main,
      details: { method: 'complete-case', rows: y.length, rowsWithGaps: leftOut, leftOut, gapsByColumn },
      table: [
        `Missing predictor values: complete cases only, ${rows.length} of ${y.length} rows; ${leftOut} row(s) with a gap left out (${Object.entries(
          gapsByColumn,
        )
          .map(([c, k]) => `${c} ${k}`)
          .join(', ')}).`,
      ],
    };
  }
  const a = validateWithGaps(model, y, columns, options.imputation, settings, extra);
  const p = a.imputed.pooled;
  const cc = a.completeCase;
  const details = {
    method: 'multiple imputation',
    rows: a.n,
    rowsWithGaps: a.rowsWithGaps,
    gapsByColumn,
    imputation: {
      imputations: a.imputed.imputations,
      iterations: a.imputed.iterations,
      seed: a.imputed.seed,
      donors: a.imputed.donors,
      method: IMPUTATION_METHOD,
      columns: Object.fromEntries(
        columns.map((c) => [
          c.name,
          c.kind === 'numeric'
            ? 'predictive mean matching'
            : c.kind === 'binary'
              ? 'logistic regression'
              : 'multinomial logistic regression',
        ]),
      ),
      extraColumns: options.extraColumns,
      computed: 'in this process, one completed data set after another',
    },
    pooling: {
      rule: "Rubin's rules (Rubin 1987) with Barnard–Rubin degrees of freedom as mice::pool.scalar; AUC on the logit scale, O/E on the log scale, calibration intercept and slope as they are (Marshall et al. 2009); other numbers are means over the completed data sets",
      auc: pooledJson(p.auc),
      calibrationIntercept: pooledJson(p.calibrationIntercept),
      calibrationSlope: pooledJson(p.calibrationSlope),
      oe: pooledJson(p.oe),
    },
    completeCase: { n: cc.n, leftOut: cc.leftOut, result: cc.result ? toJson(cc.result) : null, refused: cc.refused },
  };
  const f = (v: number, d = 4) => formatNumber(v, d);
  const row = (name: string, m: PooledMetric | null, c: { estimate: number; lower: number; upper: number } | null) =>
    `${name.padEnd(22)} ${m ? `${f(m.estimate)} (${f(m.estimateLower)} to ${f(m.estimateUpper)})` : 'not estimable'.padEnd(26)}  ${m ? `${f(m.within, 6)}  ${f(m.between, 6)}  ${f(m.fmi, 3)}` : ''}   ${c ? `${f(c.estimate)} (${f(c.lower)} to ${f(c.upper)})` : 'not estimable'}`;
  const ccr = cc.result;
  const ccFit = (r: ValidationResult['calibrationIntercept'] | undefined) => (r && r.converged ? r : null);
  const table = [
    `Missing predictor values: ${a.rowsWithGaps} of ${a.n} rows have a gap (${Object.entries(gapsByColumn)
      .map(([c, k]) => `${c} ${k}`)
      .join(', ')}).`,
    `Multiple imputation: ${a.imputed.imputations} imputations, ${a.imputed.iterations} iterations, seed ${a.imputed.seed}; the table above is the pooled analysis.`,
    '',
    `${'Pooled (Rubin)'.padEnd(22)} ${'estimate (95% CI)'.padEnd(26)}  within    between   fmi     complete cases (${cc.n} rows, ${cc.leftOut} left out)`,
    row('AUC (logit scale)', p.auc, ccr ? ccr.auc : null),
    row('Calibration intercept', p.calibrationIntercept, ccFit(ccr?.calibrationIntercept)),
    row('Calibration slope', p.calibrationSlope, ccFit(ccr?.calibrationSlope)),
    row('O/E (log scale)', p.oe, ccr ? ccr.oe : null),
    ...(cc.refused ? [`Complete cases could not be analysed: ${cc.refused}`] : []),
  ];
  return { main: pooledAsResult(a), details, table };
}
