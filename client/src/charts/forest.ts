// Rows, words and the interval drawing behind the forest plots of subgroup and site performance: one row per level
// with its 95% CI, the levels below the minimum events marked, and the heterogeneity or pooling result in a sentence.
import type { Plugin } from 'chart.js';
import { formatCount, formatFigure, formatNumber, formatPValue, type Figure } from '@shared/format';
import type {
  HeterogeneityTest,
  LevelPerformance,
  PooledAnalysis,
  PooledMetric,
  SiteAnalysis,
} from '@shared/subgroups';
import type { ValidationResult } from '@shared/validation';

/** The four metrics each section plots, the level field that holds it, the pooled metric and the scale it pools on. */
export const FOREST_METRICS = [
  { key: 'auc', figure: 'auc', label: 'AUC', pooled: 'logitAuc', scale: ' on the logit scale' },
  {
    key: 'calibrationIntercept',
    figure: 'calibrationIntercept',
    label: 'Calibration-in-the-large',
    pooled: 'calibrationIntercept',
    scale: '',
  },
  {
    key: 'calibrationSlope',
    figure: 'calibrationSlope',
    label: 'Calibration slope',
    pooled: 'calibrationSlope',
    scale: '',
  },
  { key: 'oe', figure: 'oe', label: 'O/E', pooled: 'logOe', scale: ' on the log scale' },
] as const satisfies readonly { key: Figure; figure: Figure; label: string; pooled: PooledMetric; scale: string }[];
export type ForestMetric = (typeof FOREST_METRICS)[number];

/** One row of a forest plot: a level's estimate and CI, or why there is none. */
export interface ForestRow {
  label: string;
  estimate: number | null;
  lower: number | null;
  upper: number | null;
  belowMinimum: boolean;
  /** Why the row has no point (the engine's reason, or the metric could not be estimated). */
  reason: string | null;
}

/** The pooled random-effects row: a diamond with its CI, and the 95% prediction interval when there is one. */
export interface ForestPooled {
  label: string;
  estimate: number;
  lower: number;
  upper: number;
  predictionLower: number;
  predictionUpper: number;
}

const finite = (x: number | null | undefined): x is number => typeof x === 'number' && Number.isFinite(x);

export function forestRows(levels: readonly LevelPerformance[], metric: ForestMetric): ForestRow[] {
  return levels.map((l) => {
    const e = l[metric.key];
    const ok = !!e && finite(e.estimate);
    return {
      label: l.level,
      estimate: ok ? e.estimate : null,
      lower: ok && finite(e.lower) ? e.lower : null,
      upper: ok && finite(e.upper) ? e.upper : null,
      belowMinimum: l.belowMinimum,
      reason: ok ? null : (l.error ?? `${metric.label} could not be estimated in this group`),
    };
  });
}

/** The whole cohort's value of a metric, drawn as the vertical reference line. */
export function overallValue(overall: ValidationResult | null | undefined, metric: ForestMetric): number | null {
  const e = overall?.[metric.key];
  const v = e && 'estimate' in e ? e.estimate : null;
  return finite(v) ? v : null;
}

/** One metric's pooling across sites, as the run stores it. */
export type SitePooled = SiteAnalysis['pooled'][PooledMetric];

export function pooledRow(analysis: SitePooled): ForestPooled | null {
  const r = analysis.result;
  return r ? { label: 'Pooled (random effects)', ...r.natural } : null;
}

const levelList = (xs: readonly string[]) => xs.join(', ');
const excludedText = (a: PooledAnalysis<unknown>) =>
  a.excluded.length ? ` Left out: ${a.excluded.map((e) => `${e.level} (${e.reason})`).join('; ')}.` : '';

/** "Cochran's Q … : Q = 4.21 on 2 df, p = 0.122, across A, B, C." or why there is no test. */
export function heterogeneityText(what: string, a: PooledAnalysis<HeterogeneityTest>): string {
  if (!a.result) return `${what}: not tested — fewer than two groups could be estimated.${excludedText(a)}`;
  const r = a.result;
  const verdict =
    r.pValue < 0.05
      ? 'the groups differ more than chance alone would explain'
      : 'no clear evidence that the groups differ';
  return `${what}: ${r.method}: Q = ${formatNumber(r.q, 2)} on ${formatCount(r.df)} df, ${formatPValue(r.pValue)} across ${levelList(a.levels)} (${verdict}).${excludedText(a)}`;
}

/** τ², I², Q and the prediction interval of one pooled metric in a sentence. */
export function randomEffectsText(metric: ForestMetric, a: SitePooled): string {
  if (!a.result) return `${metric.label}: not pooled — fewer than two sites could be estimated.${excludedText(a)}`;
  const r = a.result;
  const f = metric.figure;
  const pi =
    finite(r.natural.predictionLower) && finite(r.natural.predictionUpper)
      ? `95% prediction interval ${formatFigure(f, r.natural.predictionLower)} to ${formatFigure(f, r.natural.predictionUpper)}`
      : 'no prediction interval (it needs at least 3 sites)';
  return `${metric.label}: pooled ${formatFigure(f, r.natural.estimate)} (95% CI ${formatFigure(f, r.natural.lower)} to ${formatFigure(f, r.natural.upper)}) over ${formatCount(r.k)} sites, REML random effects${metric.scale}; τ² = ${formatNumber(r.tau2, 4)}, I² = ${formatNumber(r.i2, 1)}%, Q = ${formatNumber(r.q, 2)} on ${formatCount(r.qDf)} df, ${formatPValue(r.qPValue)}; ${pi}.${excludedText(a)}`;
}

/** Cautions for the site section: too few sites for a prediction interval, or sites below the minimum events. */
export function siteCautions(levels: readonly LevelPerformance[], minimum: number): string[] {
  const out: string[] = [];
  const estimable = levels.filter((l) => !l.error).length;
  if (estimable < 3)
    out.push(
      `Only ${formatCount(estimable)} site${estimable === 1 ? '' : 's'} could be estimated: with fewer than 3 there is no prediction interval, and τ² is barely estimable.`,
    );
  const small = levels.filter((l) => l.belowMinimum).map((l) => l.level);
  if (small.length)
    out.push(
      `${levelList(small)} ${small.length === 1 ? 'has' : 'have'} fewer than ${formatCount(minimum)} events or non-events: ${small.length === 1 ? 'its' : 'their'} figures are imprecise and weigh little in the pooling.`,
    );
  return out;
}

/** A point of a forest plot with its interval along x; `y` is the row index. */
export interface ForestPoint {
  x: number;
  y: number;
  xMin: number;
  xMax: number;
}

/**
 * Draws horizontal interval bars for every dataset whose `intervals` option is set: 'ci' a solid bar with caps,
 * 'prediction' a dashed bar (chart.js has no built-in error bars).
 */
export const horizontalIntervalsPlugin: Plugin = {
  id: 'plumblineForestIntervals',
  beforeDatasetsDraw(chart) {
    const { ctx } = chart;
    const x = chart.scales.x;
    const y = chart.scales.y;
    chart.data.datasets.forEach((ds, i) => {
      const kind = (ds as { intervals?: 'ci' | 'prediction' }).intervals;
      if (!kind || !chart.isDatasetVisible(i)) return;
      ctx.save();
      ctx.strokeStyle = (ds.borderColor as string) ?? '#333';
      ctx.lineWidth = kind === 'ci' ? 1.5 : 1;
      if (kind === 'prediction') ctx.setLineDash([4, 3]);
      for (const raw of ds.data as unknown as ForestPoint[]) {
        if (!raw || !finite(raw.xMin) || !finite(raw.xMax)) continue;
        const py = y.getPixelForValue(raw.y);
        const left = x.getPixelForValue(raw.xMin);
        const right = x.getPixelForValue(raw.xMax);
        ctx.beginPath();
        ctx.moveTo(left, py);
        ctx.lineTo(right, py);
        if (kind === 'ci') {
          ctx.moveTo(left, py - 4);
          ctx.lineTo(left, py + 4);
          ctx.moveTo(right, py - 4);
          ctx.lineTo(right, py + 4);
        }
        ctx.stroke();
      }
      ctx.restore();
    });
  },
};
