// The result of one validation: the engine returns it, the API stores it whole, the client draws it.

export interface Estimate {
  estimate: number;
  lower: number;
  upper: number;
}

/** A logistic fit that may fail: failure is a value, never a NaN in a report. */
export type FitResult<T> =
  | ({ converged: true } & T)
  | { converged: false; reason: 'separation' | 'non-convergence' | 'too few events' | 'degenerate'; detail: string };

export interface ThresholdRow {
  threshold: number;
  tp: number;
  fp: number;
  tn: number;
  fn: number;
  sensitivity: Estimate;
  specificity: Estimate;
  ppv: Estimate;
  npv: Estimate;
}

export interface NetBenefitRow {
  threshold: number;
  model: number;
  treatAll: number;
  treatNone: number;
  /** Net benefit / prevalence (Kerr et al. 2016); absent on results stored before it was added. */
  standardized?: number;
}

export interface CalibrationGroup {
  group: number;
  n: number;
  events: number;
  meanPredicted: number;
  observed: Estimate; // Wilson 95% CI
}

export interface ValidationSettings {
  thresholds: number[];
  netBenefitThresholds?: number[];
  loessSpan: number;
  hosmerLemeshowGroups: number;
  calibrationGroups: number;
  bootstrapReplicates: number;
  bootstrapSeed: number;
  /** How Hosmer–Lemeshow and grouped-calibration cut points are taken (default 'quantile-type2'). */
  hosmerLemeshowRule?: 'quantile-type2' | 'quantile-type7';
  /** Loess is evaluated directly at every distinct p up to this n (default 5000), on a grid above it. */
  loessExactMaxN?: number;
  /** Grid points for the loess curve on large cohorts and for plotting (default 100). */
  loessGridSize?: number;
}

/** Pointwise 95% bootstrap band of the loess calibration curve at fixed grid points (server/src/stats/bootstrap.ts). */
export interface CalibrationBand {
  /** The fixed grid: the point curve's plotting points (quantiles of p in the cohort itself). */
  p: number[];
  observed: number[];
  lower: number[];
  upper: number[];
  replicates: number;
  seed: number;
  method: string;
}

export interface ValidationResult {
  engineVersion: string;
  n: number;
  events: number;
  nonEvents: number;
  eventRate: number;
  extremeProbabilities: { zeros: number; ones: number; handling: string };
  auc: Estimate & { se: number };
  rocCurve: { fpr: number[]; tpr: number[]; thresholds: number[] };
  logLoss: number;
  logLossTotal: number;
  brier: number;
  scaledBrier: number;
  calibrationIntercept: FitResult<Estimate & { se: number }>;
  calibrationSlope: FitResult<Estimate & { se: number; intercept: number }>;
  oe: Estimate & { observed: number; expected: number; method: string };
  hosmerLemeshow: { statistic: number; df: number; pValue: number; groups: number; rule: string };
  spiegelhalter: { z: number; pValue: number };
  calibrationCurve: {
    grouped: CalibrationGroup[];
    smoothed: { p: number[]; observed: number[] }; // on a grid for plotting
    span: number;
    evaluation: string;
  };
  ici: number;
  e50: number;
  e90: number;
  emax: number;
  netBenefit: NetBenefitRow[];
  thresholds: ThresholdRow[];
  riskHistogram: { edges: number[]; events: number[]; nonEvents: number[] };
  bootstrap?: {
    replicates: number;
    seed: number;
    intervals: Record<string, Estimate>;
    /** replicates in which a metric could not be computed (e.g. a resample without events), left out of its interval. */
    failed?: Record<string, number>;
    method?: string;
  };
  warnings: string[];
}
