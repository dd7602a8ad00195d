// Result shapes of the subgroup (fairness) and site analyses and of the meta-analysis behind them, shared by the
// engine (server/src/stats/groupPerformance.ts, metaAnalysis.ts), the stored run record and the pages.
import type { AdequacyLevel } from './adequacy';
import type { Estimate } from './validation';

export interface LevelPerformance {
  level: string;
  n: number;
  events: number;
  nonEvents: number;
  adequacy: AdequacyLevel;
  /** Fewer events or non-events than the published minimum: shown, with this flag. */
  belowMinimum: boolean;
  /** Why the engine could not compute this level, when it could not. */
  error: string | null;
  auc: (Estimate & { se: number }) | null;
  calibrationIntercept: (Estimate & { se: number }) | null;
  calibrationSlope: (Estimate & { se: number }) | null;
  oe: (Estimate & { seLog: number }) | null;
  /** Point value and seeded percentile bootstrap CI (NaN bounds when no replicates were asked for). */
  ici: Estimate | null;
  /**
   * The level's smoothed calibration curve: the whole-cohort curve's method (loess, same span) on this level's rows,
   * on up to the same number of grid points (quantiles of the level's risks). Null when the engine refused the level;
   * absent on runs stored before engine 1.2.0.
   */
  calibrationCurve?: { p: number[]; observed: number[] } | null;
}

/** The effect on the pooling scale for one level and metric. */
export type PooledMetric = 'logitAuc' | 'calibrationIntercept' | 'calibrationSlope' | 'logOe';

export interface RandomEffectsResult {
  k: number;
  tau2: number;
  estimate: number;
  se: number;
  lower: number;
  upper: number;
  z: number;
  pValue: number;
  q: number;
  qDf: number;
  qPValue: number;
  /** I² in percent (0–100), as metafor prints it. */
  i2: number;
  /** Riley, Higgins & Deeks 2011: t on k − 2 df; NaN when k < 3. */
  predictionInterval: { lower: number; upper: number; df: number };
  /** metafor's predict() default: normal quantile. */
  predictionIntervalNormal: { lower: number; upper: number };
  iterations: number;
}

export interface HeterogeneityTest {
  /** Fixed-effect (inverse-variance) pooled value across the levels. */
  pooled: number;
  pooledSe: number;
  q: number;
  df: number;
  pValue: number;
  method: string;
}

export interface PooledAnalysis<T> {
  /** Levels that entered, in order. */
  levels: string[];
  /** Levels left out, with why. */
  excluded: { level: string; reason: string }[];
  result: T | null;
}

export interface SubgroupAnalysis {
  levels: LevelPerformance[];
  heterogeneity: { calibrationIntercept: PooledAnalysis<HeterogeneityTest>; logOe: PooledAnalysis<HeterogeneityTest> };
}

export interface SiteAnalysis {
  levels: LevelPerformance[];
  /** REML random effects per metric on its pooling scale; `natural` back-transforms logit AUC (expit) and log O/E (exp). */
  pooled: Record<
    PooledMetric,
    PooledAnalysis<
      RandomEffectsResult & {
        natural: { estimate: number; lower: number; upper: number; predictionLower: number; predictionUpper: number };
      }
    >
  >;
}
