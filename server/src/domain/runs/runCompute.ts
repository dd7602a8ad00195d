// The computation of one validation run, pure (no database, no Express): the worker thread, the demo seed and
// reproduce all call this one function, so a stored run and its re-computation go through the same code.
import { createHash } from 'node:crypto';
import type { ScoreModel } from '@shared/model';
import { formatCount, formatPercent } from '@shared/format';
import {
  MIN_SUBGROUP_EVENTS,
  type PeriodResult,
  type RunResults,
  type RunSettings,
  type SubgroupMetrics,
  type SubgroupResult,
  type TimeGrouping,
} from '@shared/runs';
import type { Estimate, FitResult, ValidationResult, ValidationSettings } from '@shared/validation';
import { applyModel, ENGINE_VERSION, resolveSettings, validate } from '../../stats/index';
import { calibrationBand } from '../../stats/bootstrap';
import { siteAnalysis, subgroupAnalysis } from '../../stats/groupPerformance';
import { canonical } from '../accounts/audit';
import type { CohortData } from '../cohorts/cohortData';
import { completeCaseData, missingDataAnalysis, MissingDataInputError, predictorGaps } from './runMissingData';

export { ENGINE_VERSION };

export interface RunScoreInput {
  mode: 'formula' | 'supplied';
  model: ScoreModel | null;
  probabilityColumn: string | null;
}

export interface RunComputeInput {
  score: RunScoreInput;
  data: CohortData;
  settings: RunSettings;
}

export type ProgressFn = (fraction: number, message: string) => void;

/** A run that cannot be computed (missing column, bad value, no events): the message is shown to the user. */
export class RunInputError extends Error {}

export const sha256 = (text: string) => createHash('sha256').update(text).digest('hex');

/** JSON as stored in jsonb (undefined dropped, NaN → null), so a hash over it survives the round trip. */
export const asStored = <T>(value: T): T => JSON.parse(JSON.stringify(value)) as T;

export const resultsSha256 = (results: RunResults) => sha256(canonical(asStored(results)));

/** What the result depends on: the formula, the cohort (by its source hash and size), the settings and the engine. */
export function inputsSha256(
  score: RunScoreInput,
  cohort: { sourceSha256: string; rowCount: number },
  settings: RunSettings,
  engineVersion = ENGINE_VERSION,
): string {
  return sha256(
    canonical(
      asStored({
        engineVersion,
        score: { mode: score.mode, model: score.model, probabilityColumn: score.probabilityColumn },
        cohort: { sourceSha256: cohort.sourceSha256, rowCount: cohort.rowCount },
        settings,
      }),
    ),
  );
}

export function engineSettings(s: RunSettings, withBootstrap = true): Partial<ValidationSettings> {
  return {
    thresholds: s.thresholds,
    netBenefitThresholds: s.netBenefitThresholds,
    loessSpan: s.loessSpan,
    hosmerLemeshowGroups: s.hosmerLemeshowGroups,
    calibrationGroups: s.calibrationGroups,
    bootstrapReplicates: withBootstrap ? s.bootstrapReplicates : 0,
    bootstrapSeed: s.bootstrapSeed,
  };
}

const cellText = (v: number | string | null | undefined) => (v === null || v === undefined ? '' : String(v));

/** Predicted risk per row: the score's formula on the predictor columns, or the supplied probability column. */
export function predictedRisk(score: RunScoreInput, data: CohortData): Float64Array {
  if (score.mode === 'formula') {
    if (!score.model) throw new RunInputError('the score version has no formula');
    const columns: Record<string, string[]> = {};
    for (const pred of score.model.predictors) {
      const col = data.columns[pred.column];
      if (!col) throw new RunInputError(`the cohort lacks the predictor column "${pred.column}" that the score needs`);
      if (!columns[pred.column]) columns[pred.column] = col.map(cellText);
    }
    const applied = applyModel(score.model, columns, data.n);
    if (!applied.ok) throw new RunInputError(`${rowLabel(data, applied.row)}${applied.message}`);
    return applied.p;
  }
  const column = score.probabilityColumn ?? '';
  const col = data.columns[column];
  if (!col) throw new RunInputError(`the cohort lacks the supplied probability column "${column}"`);
  const p = new Float64Array(data.n);
  for (let i = 0; i < data.n; i++) {
    const v = col[i];
    const x = typeof v === 'number' ? v : v === null || v.trim() === '' ? NaN : Number(v);
    if (!(x >= 0 && x <= 1))
      throw new RunInputError(
        `cohort line ${data.lineNo[i]}: supplied probability ${JSON.stringify(v)} is not a number in [0, 1]`,
      );
    p[i] = x;
  }
  return p;
}

// The engine numbers rows from 1 in array order; the steward knows them by the cohort's line number.
function rowLabel(data: CohortData, row: number): string {
  return row >= 1 && row <= data.n ? `cohort line ${data.lineNo[row - 1]}: ` : '';
}

const estimateOf = (e: Estimate | undefined): Estimate | null =>
  e && Number.isFinite(e.estimate) ? { estimate: e.estimate, lower: e.lower, upper: e.upper } : null;

function fitEstimate(f: FitResult<Estimate>, what: string, warnings: string[]): Estimate | null {
  if (f.converged) return estimateOf(f);
  warnings.push(`${what}: ${f.reason} (${f.detail})`);
  return null;
}

function headline(r: ValidationResult): Omit<SubgroupMetrics, 'eventRate'> & { eventRate: number } {
  const warnings: string[] = [...r.warnings];
  return {
    eventRate: r.eventRate,
    auc: estimateOf(r.auc),
    calibrationIntercept: fitEstimate(r.calibrationIntercept, 'calibration-in-the-large', warnings),
    calibrationSlope: fitEstimate(r.calibrationSlope, 'calibration slope', warnings),
    oe: estimateOf(r.oe),
    brier: Number.isFinite(r.brier) ? r.brier : null,
    ici: Number.isFinite(r.ici) ? r.ici : null,
    warnings,
  };
}

function subset(p: Float64Array, y: Uint8Array, idx: number[]): { p: Float64Array; y: Uint8Array; events: number } {
  const sp = new Float64Array(idx.length);
  const sy = new Uint8Array(idx.length);
  let events = 0;
  idx.forEach((i, k) => {
    sp[k] = p[i];
    sy[k] = y[i];
    events += y[i];
  });
  return { p: sp, y: sy, events };
}

/** Figures of a part of the cohort, or the engine's refusal as a warning (never a thrown run). */
function partMetrics(p: Float64Array, y: Uint8Array, settings: RunSettings): SubgroupMetrics {
  try {
    // Subgroups and periods report headline figures without bootstrap: the bootstrap is for the whole cohort.
    return headline(validate(p, y, engineSettings(settings, false)));
  } catch (err) {
    return {
      eventRate: NaN,
      auc: null,
      calibrationIntercept: null,
      calibrationSlope: null,
      oe: null,
      brier: null,
      ici: null,
      warnings: [(err as Error).message],
    };
  }
}

export function periodOf(date: string | null, grouping: TimeGrouping): string | null {
  if (!date || grouping === 'none') return null;
  const m = /^(\d{4})-(\d{2})/.exec(date);
  if (!m) return null;
  if (grouping === 'month') return `${m[1]}-${m[2]}`;
  return `${m[1]}-Q${Math.floor((Number(m[2]) - 1) / 3) + 1}`;
}

const MISSING_LEVEL = '(not recorded)';

/** Below this share of patients (or this many) an indicator's level is called rare on the run page. */
const RARE_LEVEL_SHARE = 0.01;
const RARE_LEVEL_COUNT = 10;

/** Warnings for indicator predictors whose level is absent or rare in the cohort: a coding mismatch gives wrong risks silently. */
export function indicatorLevelWarnings(score: RunScoreInput, data: CohortData): string[] {
  if (score.mode !== 'formula' || !score.model) return [];
  const out: string[] = [];
  for (const t of score.model.predictors) {
    if (t.transform !== 'indicator' || t.level === undefined) continue;
    const values = data.columns[t.column];
    if (!values) continue;
    let hits = 0;
    for (let i = 0; i < data.n; i++) if (values[i] !== null && String(values[i]) === t.level) hits++;
    const share = data.n ? hits / data.n : 0;
    if (hits === 0)
      out.push(
        `No patient has ${t.column} = "${t.level}", the level the formula expects: that term never counts, so predicted risks may be wrong. Check how the column is coded.`,
      );
    else if (hits < RARE_LEVEL_COUNT || share < RARE_LEVEL_SHARE)
      out.push(
        `Only ${formatCount(hits)} patient${hits === 1 ? '' : 's'} (${formatPercent(share)}) have ${t.column} = "${t.level}", the level the formula expects: check how the column is coded.`,
      );
  }
  return out;
}

/** What the run page says when rows with a missing predictor were left out. */
export function leftOutWarning(leftOut: number, n: number): string {
  return `${formatCount(leftOut)} of ${formatCount(n)} patients (${formatPercent(leftOut / n)}) miss a predictor the score needs and were left out: these figures are from the complete cases only.`;
}

/** "Computing bootstrap replicate 420 of 2,000": what the run page says while the bootstrap runs. */
export function bootstrapProgressText(done: number, total: number): string {
  return `Computing bootstrap replicate ${formatCount(done)} of ${formatCount(total)}`;
}

/**
 * The whole run. On a cohort with gaps in the score's predictors every figure is computed on the complete cases, and
 * `missingData` says what was left out and, when the settings ask for it, holds the pooled multiple imputation
 * (runMissingData.ts). Throws RunInputError on bad input.
 */
export function computeRunResults(input: RunComputeInput, onProgress: ProgressFn = () => {}): RunResults {
  const gaps = predictorGaps(input.score, input.data);
  const mi = input.settings.missingData?.method === 'multiple-imputation';
  if (mi && input.score.mode !== 'formula')
    throw new RunInputError(
      'multiple imputation needs a score with a formula: a supplied probability has no predictors',
    );
  if (!gaps || (gaps.rowsWithGaps === 0 && !mi)) return computeCohortResults(input, onProgress);
  // the imputation takes most of an imputed run: the complete-case figures get the first 30 % of the bar
  const share = mi && gaps.rowsWithGaps > 0 ? 0.3 : 1;
  const completeCase = completeCaseData(input.score, input.data, gaps);
  // the run's sections (subgroups, periods, drift) stand on the complete cases, so they must be analysable
  if (completeCase.n === 0) throw new RunInputError('every patient has a gap in a predictor the score uses');
  const results = computeCohortResults({ ...input, data: completeCase }, (f, m) => onProgress(f * share, m));
  if (gaps.rowsWithGaps) results.overall.warnings.push(leftOutWarning(gaps.rowsWithGaps, input.data.n));
  try {
    const missingData = missingDataAnalysis(
      {
        ...input,
        gaps,
        completeCase: results.overall,
        engineSettings: resolveSettings(engineSettings(input.settings, false)),
      },
      (f, m) => onProgress(share + (1 - share) * f, m),
    );
    onProgress(1, 'Done');
    return { ...results, missingData };
  } catch (err) {
    if (err instanceof MissingDataInputError) throw new RunInputError(err.message);
    throw err;
  }
}

/** Overall figures, then each subgroup level, then each period, on the rows given. */
function computeCohortResults(input: RunComputeInput, onProgress: ProgressFn = () => {}): RunResults {
  const { data, settings } = input;
  onProgress(0.02, 'Computing predicted risk');
  const p = predictedRisk(input.score, data);
  const y = data.outcome;

  onProgress(0.1, "Computing the whole cohort's figures");
  const total = settings.bootstrapReplicates;
  let lastTold = 0;
  // The bootstrap takes most of a run: each replicate moves the bar from 10 % to 50 %, told at most every 200 ms.
  const onReplicate = (done: number) => {
    const now = Date.now();
    if (done < total && now - lastTold < 200) return;
    lastTold = now;
    onProgress(0.1 + (0.4 * done) / total, bootstrapProgressText(done, total));
  };
  let overall: ValidationResult;
  try {
    overall = validate(p, y, engineSettings(settings), onReplicate);
  } catch (err) {
    throw new RunInputError((err as Error).message);
  }
  overall.warnings.push(...indicatorLevelWarnings(input.score, data));

  // The full subgroup (fairness) and site analyses: pure engine functions over the column's labels.
  const labelsOf = (column: string, what: string): string[] => {
    const values = data.subgroups[column] ?? data.columns[column];
    if (!values) throw new RunInputError(`the cohort has no ${what} column "${column}"`);
    return Array.from({ length: data.n }, (_, i) => {
      const v = values[i];
      return v === null || v === undefined || String(v).trim() === '' ? MISSING_LEVEL : String(v);
    });
  };
  const levelSettings = resolveSettings(engineSettings(settings));
  const subgroups: SubgroupResult[] = [];
  const subgroupAnalyses: NonNullable<RunResults['subgroupAnalyses']> = [];
  const nCols = settings.subgroupColumns.length;
  settings.subgroupColumns.forEach((column, c) => {
    onProgress(0.5 + (0.35 * c) / Math.max(1, nCols), `Computing subgroups by ${column}`);
    const values = data.subgroups[column] ?? data.columns[column];
    if (!values) throw new RunInputError(`the cohort has no subgroup column "${column}"`);
    const byLevel = new Map<string, number[]>();
    for (let i = 0; i < data.n; i++) {
      const v = values[i];
      const level = v === null || v === undefined || String(v).trim() === '' ? MISSING_LEVEL : String(v);
      if (!byLevel.has(level)) byLevel.set(level, []);
      byLevel.get(level)!.push(i);
    }
    for (const level of [...byLevel.keys()].sort()) {
      const part = subset(p, y, byLevel.get(level)!);
      const n = part.p.length;
      const tooSmall = part.events < MIN_SUBGROUP_EVENTS || n - part.events < MIN_SUBGROUP_EVENTS;
      subgroups.push({
        column,
        level,
        n,
        events: part.events,
        tooSmall,
        ...(tooSmall ? {} : { result: partMetrics(part.p, part.y, settings) }),
      });
    }
    subgroupAnalyses.push({ column, ...subgroupAnalysis(p, y, labelsOf(column, 'subgroup'), levelSettings) });
  });

  let sites: RunResults['sites'];
  if (settings.siteColumn) {
    onProgress(0.85, `Computing sites by ${settings.siteColumn}`);
    sites = {
      column: settings.siteColumn,
      ...siteAnalysis(p, y, labelsOf(settings.siteColumn, 'site'), levelSettings),
    };
  }
  const band =
    settings.bootstrapReplicates > 0
      ? calibrationBand(p, y, overall.calibrationCurve.smoothed, levelSettings)
      : undefined;

  const periods: PeriodResult[] = [];
  let undatedRows: number | undefined;
  if (settings.timeGrouping !== 'none') {
    onProgress(0.85, `Computing periods by ${settings.timeGrouping}`);
    const byPeriod = new Map<string, number[]>();
    undatedRows = 0;
    for (let i = 0; i < data.n; i++) {
      const period = periodOf(data.eventDate[i], settings.timeGrouping);
      if (!period) {
        undatedRows++;
        continue;
      }
      if (!byPeriod.has(period)) byPeriod.set(period, []);
      byPeriod.get(period)!.push(i);
    }
    if (byPeriod.size === 0)
      throw new RunInputError(`time grouping by ${settings.timeGrouping} needs event dates, and this cohort has none`);
    for (const period of [...byPeriod.keys()].sort()) {
      const part = subset(p, y, byPeriod.get(period)!);
      const n = part.p.length;
      let expected = 0;
      for (let k = 0; k < n; k++) expected += part.p[k];
      const tooSmall = part.events < MIN_SUBGROUP_EVENTS || n - part.events < MIN_SUBGROUP_EVENTS;
      const m = tooSmall ? null : partMetrics(part.p, part.y, settings);
      periods.push({
        period,
        n,
        events: part.events,
        tooSmall,
        auc: m?.auc ?? null,
        calibrationIntercept: m?.calibrationIntercept ?? null,
        calibrationSlope: m?.calibrationSlope ?? null,
        oe: m?.oe ?? null,
        observed: part.events / n,
        expected: expected / n,
        warnings: m ? m.warnings : [`fewer than ${MIN_SUBGROUP_EVENTS} events or non-events: figures not computed`],
      });
    }
  }
  onProgress(1, 'Done');
  return {
    overall,
    subgroups,
    periods,
    ...(undatedRows !== undefined ? { undatedRows } : {}),
    minSubgroupEvents: MIN_SUBGROUP_EVENTS,
    ...(subgroupAnalyses.length ? { subgroupAnalyses } : {}),
    ...(sites ? { sites } : {}),
    ...(band ? { calibrationBand: band } : {}),
  };
}
