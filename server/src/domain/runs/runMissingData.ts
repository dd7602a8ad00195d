// Missing predictor values in a run (pure, no database): which rows have a gap in a column the score uses, the
// complete-case cohort the rest of the run is computed on, how the patients left out differ, and — when the settings
// ask for it — multiple imputation by chained equations (stats/chainedImputation.ts) with every completed data set
// validated and the figures pooled by Rubin's rules (stats/rubinsRules.ts, stats/pooledValidation.ts).
// A gap is a null (or NaN, or empty text) in a predictor column the score's formula uses.
import {
  CURVE_POOLING,
  DISAGREEMENT_RULE,
  INCOMPLETE_SHARE_RULE,
  INCOMPLETE_SHARE_WARNING,
  PERIOD_IMPUTATION_COLUMN,
  POOLING_RULE,
  type ImputedColumnDiagnostic,
  type LeftOutComparison,
  type MissingDataResult,
  type PooledFigure,
} from '@shared/missingData';
import { formatCount, formatPercent } from '@shared/format';
import type { RunSettings } from '@shared/runs';
import type { ValidationResult, ValidationSettings } from '@shared/validation';
import { defaultImputationSettings, IMPUTATION_METHOD, imputeOnce } from '../../stats/chainedImputation';
import { EngineInputError } from '../../stats/checkInputs';
import { Z975 } from '../../stats/distributions';
import { computeFullSet } from '../../stats/fullSet';
import { poolResults, riskFromColumns, seLogOe, type CohortColumn } from '../../stats/pooledValidation';
import { onPoolingScale, type PooledMetric, type PoolingScale } from '../../stats/rubinsRules';
import type { CohortData } from '../cohorts/cohortData';
import type { RunScoreInput } from './runCompute';

type Cell = number | string | null | undefined;
const isGap = (v: Cell) =>
  v === null ||
  v === undefined ||
  (typeof v === 'number' && Number.isNaN(v)) ||
  (typeof v === 'string' && v.trim() === '');

/** A run that cannot be computed as asked: the caller turns it into its RunInputError. */
export class MissingDataInputError extends Error {}

export interface PredictorGaps {
  columns: string[];
  gapRow: Uint8Array;
  rowsWithGaps: number;
  gapsByColumn: Record<string, number>;
}

/** The formula's predictor columns, once each. */
export function scoreColumns(score: RunScoreInput): string[] {
  return score.mode === 'formula' && score.model ? [...new Set(score.model.predictors.map((p) => p.column))] : [];
}

/** Gaps in the score's predictor columns; null for a supplied-probability score (it reads no predictor). */
export function predictorGaps(score: RunScoreInput, data: CohortData): PredictorGaps | null {
  const columns = scoreColumns(score);
  if (!columns.length) return null;
  const gapRow = new Uint8Array(data.n);
  const gapsByColumn: Record<string, number> = {};
  for (const c of columns) {
    const values = data.columns[c];
    let k = 0;
    if (values)
      for (let i = 0; i < data.n; i++)
        if (isGap(values[i])) {
          gapRow[i] = 1;
          k++;
        }
    gapsByColumn[c] = k;
  }
  let rowsWithGaps = 0;
  for (let i = 0; i < data.n; i++) rowsWithGaps += gapRow[i];
  return { columns, gapRow, rowsWithGaps, gapsByColumn };
}

/** The cohort restricted to `rows` (in order). */
export function subsetData(data: CohortData, rows: Uint32Array): CohortData {
  const pick = <T>(a: ArrayLike<T>) => Array.from(rows, (i) => a[i]);
  return {
    cohortVersionId: data.cohortVersionId,
    n: rows.length,
    outcome: Uint8Array.from(rows, (i) => data.outcome[i]),
    lineNo: Int32Array.from(rows, (i) => data.lineNo[i]),
    columns: Object.fromEntries(Object.entries(data.columns).map(([k, v]) => [k, pick(v)])),
    eventDate: pick(data.eventDate),
    subgroups: Object.fromEntries(Object.entries(data.subgroups).map(([k, v]) => [k, pick(v)])),
  };
}

/** The patients with every predictor the score uses: the cohort itself when nothing is missing. */
export function completeCaseData(
  score: RunScoreInput,
  data: CohortData,
  gaps = predictorGaps(score, data),
): CohortData {
  if (!gaps || gaps.rowsWithGaps === 0) return data;
  const keep: number[] = [];
  for (let i = 0; i < data.n; i++) if (!gaps.gapRow[i]) keep.push(i);
  return subsetData(data, Uint32Array.from(keep));
}

// ------------------------------------------------------------------ describing the gaps

function meanSd(xs: number[]): { mean: number | null; sd: number | null } {
  if (!xs.length) return { mean: null, sd: null };
  const mean = xs.reduce((s, v) => s + v, 0) / xs.length;
  if (xs.length < 2) return { mean, sd: null };
  return { mean, sd: Math.sqrt(xs.reduce((s, v) => s + (v - mean) ** 2, 0) / (xs.length - 1)) };
}

function levelShares(values: string[]): { level: string; share: number }[] {
  const counts = new Map<string, number>();
  for (const v of values) counts.set(v, (counts.get(v) ?? 0) + 1);
  return [...counts.keys()].sort().map((level) => ({ level, share: counts.get(level)! / values.length }));
}

/** Observed values of each predictor among the complete cases against the patients left out. */
function leftOutComparison(data: CohortData, gaps: PredictorGaps, indicator: Set<string>): LeftOutComparison[] {
  return gaps.columns.map((column) => {
    const values = data.columns[column] ?? [];
    const kept: Cell[] = [];
    const out: Cell[] = [];
    for (let i = 0; i < data.n; i++) if (!isGap(values[i])) (gaps.gapRow[i] ? out : kept).push(values[i]);
    if (indicator.has(column)) {
      const k = kept.map(String);
      const o = out.map(String);
      return {
        column,
        kind: 'categorical' as const,
        kept: { observed: k.length, mean: null, sd: null, levels: levelShares(k) },
        leftOut: { observed: o.length, mean: null, sd: null, levels: levelShares(o) },
        standardizedDifference: null,
      };
    }
    const a = meanSd(kept.map(Number));
    const b = meanSd(out.map(Number));
    const pooledSd =
      a.sd !== null && b.sd !== null
        ? Math.sqrt(((kept.length - 1) * a.sd ** 2 + (out.length - 1) * b.sd ** 2) / (kept.length + out.length - 2))
        : null;
    return {
      column,
      kind: 'numeric' as const,
      kept: { observed: kept.length, ...a },
      leftOut: { observed: out.length, ...b },
      standardizedDifference: pooledSd && a.mean !== null && b.mean !== null ? (b.mean - a.mean) / pooledSd : null,
    };
  });
}

function patterns(data: CohortData, gaps: PredictorGaps): MissingDataResult['patterns'] {
  const counts = new Map<string, number>();
  for (let i = 0; i < data.n; i++) {
    if (!gaps.gapRow[i]) continue;
    const key = gaps.columns.filter((c) => isGap(data.columns[c]?.[i])).join('\u0000');
    counts.set(key, (counts.get(key) ?? 0) + 1);
  }
  return [...counts.entries()]
    .sort((a, b) => b[1] - a[1] || (a[0] < b[0] ? -1 : 1))
    .slice(0, 10)
    .map(([key, rows]) => ({ columns: key.split('\u0000'), rows }));
}

// ------------------------------------------------------------------ columns for the imputation models

/** A predictor column for the engine: level codes for a column the formula uses only as indicators, else numbers. */
function engineColumn(name: string, values: Cell[], categorical: boolean): CohortColumn {
  const n = values.length;
  const out = new Float64Array(n);
  if (categorical) {
    const levelNames = [...new Set(values.filter((v) => !isGap(v)).map((v) => String(v)))].sort();
    const code = new Map(levelNames.map((l, k) => [l, k]));
    for (let i = 0; i < n; i++) out[i] = isGap(values[i]) ? NaN : code.get(String(values[i]))!;
    if (levelNames.length < 2) return { name, kind: 'numeric', values: out, levelNames };
    return {
      name,
      kind: levelNames.length === 2 ? 'binary' : 'categorical',
      levels: levelNames.length,
      values: out,
      levelNames,
    };
  }
  let binary = true;
  for (let i = 0; i < n; i++) {
    const v = values[i];
    if (isGap(v)) {
      out[i] = NaN;
      continue;
    }
    const x = typeof v === 'number' ? v : Number(v);
    if (!Number.isFinite(x)) throw new MissingDataInputError(`column ${name} holds ${JSON.stringify(v)}, not a number`);
    out[i] = x;
    if (x !== 0 && x !== 1) binary = false;
  }
  return { name, kind: binary ? 'binary' : 'numeric', values: out };
}

const quarterOf = (date: string | null) => {
  const m = date ? /^(\d{4})-(\d{2})/.exec(date) : null;
  return m ? `${m[1]}-Q${Math.floor((Number(m[2]) - 1) / 3) + 1}` : '(undated)';
};

/** Complete columns that only inform the imputation models; a column of one level carries nothing and is left out. */
function extraColumns(data: CohortData, names: string[]): { columns: CohortColumn[]; used: string[] } {
  const columns: CohortColumn[] = [];
  for (const name of names) {
    let labels: Cell[];
    let categorical = true;
    if (name === PERIOD_IMPUTATION_COLUMN && !data.subgroups[name] && !data.columns[name])
      labels = data.eventDate.map(quarterOf);
    else if (data.subgroups[name]) labels = data.subgroups[name].map((v) => (isGap(v) ? '(not recorded)' : v));
    else if (data.columns[name]) {
      labels = data.columns[name];
      if (labels.some(isGap))
        throw new MissingDataInputError(`the imputation-model column "${name}" has gaps; it must be complete`);
      categorical = labels.some((v) => typeof v !== 'number');
    } else throw new MissingDataInputError(`the cohort has no column "${name}" for the imputation models`);
    const col = engineColumn(name, labels, categorical);
    if (col.kind === 'numeric' && col.levelNames) continue;
    columns.push(col);
  }
  return { columns, used: columns.map((c) => c.name) };
}

// ------------------------------------------------------------------ pooled curves and diagnostics

export const ROC_GRID = Array.from({ length: 101 }, (_, k) => k / 100);

/** Sensitivity at each 1 − specificity of ROC_GRID, the curve interpolated linearly (the highest point at a tie). */
export function rocOnGrid(fpr: number[], tpr: number[]): number[] {
  return ROC_GRID.map((x) => {
    let i = 0;
    while (i + 1 < fpr.length && fpr[i + 1] <= x) i++;
    if (fpr[i] === x || i + 1 >= fpr.length) return tpr[i];
    const t = (x - fpr[i]) / (fpr[i + 1] - fpr[i]);
    return tpr[i] + t * (tpr[i + 1] - tpr[i]);
  });
}

/** Linear interpolation of a curve given at increasing x. */
function interpolate(xs: number[], ys: number[], x: number): number {
  if (x <= xs[0]) return ys[0];
  let i = 0;
  while (i + 1 < xs.length && xs[i + 1] < x) i++;
  if (i + 1 >= xs.length) return ys[xs.length - 1];
  const span = xs[i + 1] - xs[i];
  return span > 0 ? ys[i] + ((x - xs[i]) / span) * (ys[i + 1] - ys[i]) : ys[i + 1];
}

const CALIBRATION_GRID = 50;
const NUMERIC_BINS = 20;

function diagnostic(col: CohortColumn, imputedValues: number[], m: number): ImputedColumnDiagnostic {
  const observed: number[] = [];
  for (const v of col.values) if (!Number.isNaN(v)) observed.push(v);
  const missing = imputedValues.length / m;
  const imputedBy =
    col.kind === 'numeric'
      ? 'predictive mean matching'
      : col.kind === 'binary'
        ? 'logistic regression'
        : 'multinomial logistic regression';
  const share = (xs: number[], test: (v: number) => boolean) => (xs.length ? xs.filter(test).length / xs.length : 0);
  let bins: ImputedColumnDiagnostic['bins'];
  const distinct = [...new Set(observed)].sort((a, b) => a - b);
  if (col.levelNames || col.kind !== 'numeric' || distinct.length <= 12)
    bins = distinct.map((v) => ({
      label: col.levelNames ? col.levelNames[v] : String(v),
      observed: share(observed, (x) => x === v),
      imputed: share(imputedValues, (x) => x === v),
    }));
  else {
    const lo = distinct[0];
    const hi = distinct[distinct.length - 1];
    const width = (hi - lo) / NUMERIC_BINS;
    const binOf = (v: number) => Math.min(NUMERIC_BINS - 1, Math.max(0, Math.floor((v - lo) / width)));
    const count = (xs: number[]) => {
      const c = new Array(NUMERIC_BINS).fill(0);
      for (const v of xs) c[binOf(v)]++;
      return c.map((k) => (xs.length ? k / xs.length : 0));
    };
    const o = count(observed);
    const im = count(imputedValues);
    bins = o.map((_, k) => ({
      label: `${lo + k * width}`,
      from: lo + k * width,
      to: lo + (k + 1) * width,
      observed: o[k],
      imputed: im[k],
    }));
  }
  const mean = (xs: number[]) => (xs.length ? xs.reduce((s, v) => s + v, 0) / xs.length : null);
  return {
    column: col.name,
    kind: col.kind,
    imputedBy,
    missing,
    bins,
    observedMean: col.levelNames ? null : mean(observed),
    imputedMean: col.levelNames ? null : mean(imputedValues),
  };
}

// ------------------------------------------------------------------ the analysis

const LABELS: Record<PooledFigure['key'], string> = {
  auc: 'AUC',
  calibrationIntercept: 'Calibration-in-the-large',
  calibrationSlope: 'Calibration slope',
  oe: 'O/E',
};

/** The complete-case estimate, its variance on the pooling scale, for the comparison with the pooled one. */
function completeCaseOnScale(key: PooledFigure['key'], r: ValidationResult, scale: PoolingScale) {
  let est: { estimate: number; lower: number; upper: number };
  let se: number;
  if (key === 'auc') {
    est = r.auc;
    se = r.auc.se;
  } else if (key === 'oe') {
    est = r.oe;
    se = seLogOe(r) * r.oe.estimate; // SE(O/E) by the delta method, as the pooling takes it
  } else {
    const f = r[key];
    if (!f.converged) return null;
    est = f;
    se = f.se;
  }
  if (!Number.isFinite(est.estimate) || !Number.isFinite(se)) return null;
  const { q, u } = onPoolingScale([est.estimate], [se], scale);
  return { value: { estimate: est.estimate, lower: est.lower, upper: est.upper }, q: q[0], u: u[0] };
}

export interface MissingDataInput {
  score: RunScoreInput;
  data: CohortData;
  settings: RunSettings;
  gaps: PredictorGaps;
  /** the complete-case analysis of the run (its overall figures); null when complete cases could not be analysed */
  completeCase: ValidationResult | null;
  /** the run's engine settings without bootstrap, for each completed data set */
  engineSettings: ValidationSettings;
}

/** Completed data sets of a run, one at a time: column values in the order of `columns`. */
export function* completedDataSets(input: Pick<MissingDataInput, 'score' | 'data' | 'settings' | 'gaps'>) {
  const md = input.settings.missingData;
  if (md?.method !== 'multiple-imputation') return;
  const model = input.score.model!;
  const indicator = new Set(
    input.gaps.columns.filter((c) => model.predictors.every((q) => q.column !== c || q.transform === 'indicator')),
  );
  const columns = input.gaps.columns.map((c) => engineColumn(c, input.data.columns[c] ?? [], indicator.has(c)));
  const extra = extraColumns(input.data, md.extraColumns);
  const settings = {
    ...defaultImputationSettings,
    imputations: md.imputations,
    iterations: md.iterations,
    seed: md.seed,
  };
  for (let l = 0; l < md.imputations; l++)
    yield {
      imputation: l,
      columns,
      extra: extra.used,
      settings,
      completed: imputeOnce({ outcome: input.data.outcome, columns, extra: extra.columns }, settings, l),
    };
}

export function missingDataAnalysis(
  input: MissingDataInput,
  onProgress: (fraction: number, message: string) => void = () => {},
): MissingDataResult {
  const { data, gaps, settings } = input;
  const model = input.score.model!;
  const indicator = new Set(
    gaps.columns.filter((c) => model.predictors.every((q) => q.column !== c || q.transform === 'indicator')),
  );
  let leftOutEvents = 0;
  for (let i = 0; i < data.n; i++) if (gaps.gapRow[i]) leftOutEvents += data.outcome[i];
  let events = 0;
  for (let i = 0; i < data.n; i++) events += data.outcome[i];
  const kept = data.n - gaps.rowsWithGaps;
  const shareIncomplete = data.n ? gaps.rowsWithGaps / data.n : 0;
  const mi = settings.missingData?.method === 'multiple-imputation';
  const warnings: string[] = [];
  if (shareIncomplete > INCOMPLETE_SHARE_WARNING)
    warnings.push(
      `${formatCount(gaps.rowsWithGaps)} of ${formatCount(data.n)} patients (${formatPercent(shareIncomplete)}) have a gap in a predictor the score uses: complete cases alone may be biased when the gaps depend on the patient${mi ? '; compare with the pooled multiple imputation' : '; consider a run with multiple imputation'}.`,
    );
  const result: MissingDataResult = {
    method: mi ? 'multiple-imputation' : 'complete-case',
    rows: data.n,
    rowsWithGaps: gaps.rowsWithGaps,
    shareIncomplete,
    gapsByColumn: gaps.gapsByColumn,
    patterns: patterns(data, gaps),
    completeCase: {
      n: kept,
      events: events - leftOutEvents,
      leftOut: gaps.rowsWithGaps,
      leftOutEvents,
      eventRateKept: kept ? (events - leftOutEvents) / kept : null,
      eventRateLeftOut: gaps.rowsWithGaps ? leftOutEvents / gaps.rowsWithGaps : null,
      comparison: leftOutComparison(data, gaps, indicator),
    },
    imputed: null,
    warnings,
    rules: { incompleteShare: INCOMPLETE_SHARE_RULE, disagreement: DISAGREEMENT_RULE },
    mainAnalysis:
      'Every other figure of this run is from the complete cases (patients with every predictor the score uses recorded).',
  };
  if (!mi) return result;
  if (gaps.rowsWithGaps === 0) {
    result.imputedNote = 'No predictor the score uses has a gap in this cohort version: there is nothing to impute.';
    return result;
  }

  const m = settings.missingData?.method === 'multiple-imputation' ? settings.missingData.imputations : 0;
  const perImputation: ValidationResult[] = [];
  const rocSum = new Float64Array(ROC_GRID.length);
  const curves: { p: number[]; observed: number[] }[] = [];
  const imputedValues: number[][] = gaps.columns.map(() => []);
  let meta: { columns: CohortColumn[]; extra: string[]; settings: typeof defaultImputationSettings } | null = null;
  let lastTold = 0;
  try {
    for (const set of completedDataSets(input)) {
      meta = { columns: set.columns, extra: set.extra, settings: set.settings };
      const byName = Object.fromEntries(set.columns.map((c) => [c.name, c]));
      const values = Object.fromEntries(set.columns.map((c, j) => [c.name, set.completed[j]]));
      const r = computeFullSet(riskFromColumns(model, byName, values), data.outcome, input.engineSettings);
      rocOnGrid(r.rocCurve.fpr, r.rocCurve.tpr).forEach((t, k) => (rocSum[k] += t));
      curves.push(r.calibrationCurve.smoothed);
      set.columns.forEach((c, j) => {
        if (gaps.gapsByColumn[c.name] === 0) return;
        for (let i = 0; i < data.n; i++) if (Number.isNaN(c.values[i])) imputedValues[j].push(set.completed[j][i]);
      });
      // the per-set curves are summarised above; the pooled figures need only the estimates
      perImputation.push({ ...r, rocCurve: { fpr: [], tpr: [], thresholds: [] } });
      const now = Date.now();
      if (set.imputation + 1 === m || now - lastTold >= 200) {
        lastTold = now;
        onProgress((set.imputation + 1) / m, `Imputed and validated completed data set ${set.imputation + 1} of ${m}`);
      }
    }
  } catch (err) {
    if (err instanceof EngineInputError || err instanceof MissingDataInputError)
      throw new MissingDataInputError(err.message);
    if (err instanceof Error && /column|level|gaps/.test(err.message)) throw new MissingDataInputError(err.message);
    throw err;
  }
  const { pooled, failedFits } = poolResults(perImputation);
  const figure = (
    key: PooledFigure['key'],
    p: PooledMetric | null,
    ses: (r: ValidationResult) => number,
    est: (r: ValidationResult) => number,
  ): PooledFigure | null => {
    if (!p) return null;
    const { q, u } = onPoolingScale(perImputation.map(est), perImputation.map(ses), p.scale);
    const cc = input.completeCase ? completeCaseOnScale(key, input.completeCase, p.scale) : null;
    const disagrees = cc ? Math.abs(cc.q - p.qbar) > Z975 * Math.sqrt(cc.u + p.total) : false;
    return {
      key,
      label: LABELS[key],
      scale: p.scale,
      estimate: p.estimate,
      lower: p.estimateLower,
      upper: p.estimateUpper,
      pooledOnScale: p.qbar,
      within: p.within,
      between: p.between,
      total: p.total,
      relativeIncrease: p.riv,
      df: p.df,
      fmi: p.fmi,
      perImputation: { estimate: Array.from(q), variance: Array.from(u) },
      completeCase: cc?.value ?? null,
      disagrees,
    };
  };
  const fitSe = (key: 'calibrationIntercept' | 'calibrationSlope') => (r: ValidationResult) => {
    const f = r[key];
    return f.converged ? f.se : NaN;
  };
  const fitEst = (key: 'calibrationIntercept' | 'calibrationSlope') => (r: ValidationResult) => {
    const f = r[key];
    return f.converged ? f.estimate : NaN;
  };
  const metrics = [
    figure(
      'auc',
      pooled.auc,
      (r) => r.auc.se,
      (r) => r.auc.estimate,
    ),
    figure(
      'calibrationIntercept',
      pooled.calibrationIntercept,
      fitSe('calibrationIntercept'),
      fitEst('calibrationIntercept'),
    ),
    figure('calibrationSlope', pooled.calibrationSlope, fitSe('calibrationSlope'), fitEst('calibrationSlope')),
    figure(
      'oe',
      pooled.oe,
      (r) => seLogOe(r) * r.oe.estimate,
      (r) => r.oe.estimate,
    ),
  ].filter((f): f is PooledFigure => f !== null);
  for (const f of metrics)
    if (f.disagrees)
      warnings.push(
        `${f.label}: the complete-case estimate and the pooled multiple-imputation estimate differ by more than their intervals suggest; the gaps are probably not completely at random, so prefer the pooled analysis and find out why values are missing.`,
      );
  for (const [k, n] of Object.entries(failedFits))
    if (n > 0)
      warnings.push(
        `${LABELS[k as PooledFigure['key']]}: the fit failed in ${n} of ${m} completed data sets, so it is not pooled.`,
      );

  const avg = (f: (r: ValidationResult) => number) => perImputation.reduce((s, r) => s + f(r), 0) / m;
  const lo = Math.max(...curves.map((c) => c.p[0]));
  const hi = Math.min(...curves.map((c) => c.p[c.p.length - 1]));
  const grid =
    hi > lo ? Array.from({ length: CALIBRATION_GRID }, (_, k) => lo + ((hi - lo) * k) / (CALIBRATION_GRID - 1)) : [lo];
  result.imputed = {
    imputations: m,
    iterations: meta!.settings.iterations,
    seed: meta!.settings.seed,
    donors: meta!.settings.donors,
    extraColumns: meta!.extra,
    method: IMPUTATION_METHOD,
    pooling: POOLING_RULE,
    curvePooling: CURVE_POOLING,
    metrics,
    failedFits,
    averaged: {
      brier: avg((r) => r.brier),
      scaledBrier: avg((r) => r.scaledBrier),
      logLoss: avg((r) => r.logLoss),
      ici: avg((r) => r.ici),
      e50: avg((r) => r.e50),
      e90: avg((r) => r.e90),
      emax: avg((r) => r.emax),
    },
    events,
    n: data.n,
    rocCurve: { fpr: ROC_GRID, tpr: Array.from(rocSum, (s) => s / m) },
    calibrationCurve: {
      p: grid,
      observed: grid.map((x) => curves.reduce((s, c) => s + interpolate(c.p, c.observed, x), 0) / m),
    },
    diagnostics: meta!.columns
      .map((c, j) => (gaps.gapsByColumn[c.name] > 0 ? diagnostic(c, imputedValues[j], m) : null))
      .filter((d): d is ImputedColumnDiagnostic => d !== null),
  };
  return result;
}
