// Missing predictor values in a run: the settings choice and the result block a run on a cohort with gaps carries
// (server/src/domain/runs/runMissingData.ts computes it; the run page, the report and the checklist read it).
import { z } from 'zod';

export const MISSING_DATA_METHODS = ['complete-case', 'multiple-imputation'] as const;
export type MissingDataMethod = (typeof MISSING_DATA_METHODS)[number];

/** The imputation-model column standing for the period (quarter) of each patient's event date. */
export const PERIOD_IMPUTATION_COLUMN = 'period';

export const DEFAULT_IMPUTATIONS = 20;
export const DEFAULT_IMPUTATION_ITERATIONS = 5;
export const DEFAULT_IMPUTATION_SEED = 20_260_101;

export const missingDataSettingsSchema = z.discriminatedUnion('method', [
  z.object({ method: z.literal('complete-case') }).strict(),
  z
    .object({
      method: z.literal('multiple-imputation'),
      imputations: z.number().int().min(2).max(200).default(DEFAULT_IMPUTATIONS),
      iterations: z.number().int().min(1).max(50).default(DEFAULT_IMPUTATION_ITERATIONS),
      seed: z
        .number()
        .int()
        .min(0)
        .max(2 ** 31 - 1)
        .default(DEFAULT_IMPUTATION_SEED),
      /** Complete columns that inform the imputation models only: subgroup columns, or `period`. */
      extraColumns: z.array(z.string().trim().min(1).max(80)).max(10).default([]),
    })
    .strict(),
]);
export type MissingDataSettings = z.infer<typeof missingDataSettingsSchema>;

/**
 * Above this share of patients with a gap the page warns that complete cases may mislead. Common practice, no source:
 * 5 % is the figure often quoted as "small enough to ignore"; the warning says what the run found either way.
 */
export const INCOMPLETE_SHARE_WARNING = 0.05;

export const INCOMPLETE_SHARE_RULE =
  'warned above 5 % of patients with a gap (common practice, no source: the share often quoted as small enough to ignore)';

/**
 * Two analyses disagree when, on the pooling scale, |complete case − pooled| > 1.96·√(Var_cc + T_mi). The two share
 * their complete-case patients, so this treats dependent estimates as independent: it flags only clear disagreement.
 */
export const DISAGREEMENT_RULE =
  'flagged when, on the pooling scale, the complete-case and pooled estimates differ by more than 1.96 × √(complete-case variance + pooled total variance); both analyses share the complete-case patients, so the rule is conservative and flags only clear disagreement';

export const POOLING_RULE =
  "Rubin's rules (Rubin 1987) with Barnard–Rubin degrees of freedom, on the scale where each estimate is closest to normal (Marshall et al. 2009): AUC on the logit scale, O/E on the log scale, calibration intercept and slope as they are; the pooled estimate and its interval are transformed back";

export const CURVE_POOLING =
  'Curves are averaged over the imputations on a common grid: the ROC curve vertically (mean sensitivity at each 1 − specificity from 0 to 1 in steps of 0.01, each curve interpolated linearly), the loess calibration curve as the mean observed risk at 50 predicted risks evenly spaced over the range every imputation covers. Brier score, log loss, ICI, E50, E90 and Emax are means over the imputations (no interval).';

export interface PooledFigure {
  key: 'auc' | 'calibrationIntercept' | 'calibrationSlope' | 'oe';
  label: string;
  scale: 'identity' | 'logit' | 'log';
  estimate: number;
  lower: number;
  upper: number;
  /** Q̄ on the pooling scale */
  pooledOnScale: number;
  within: number;
  between: number;
  total: number;
  relativeIncrease: number;
  df: number;
  fmi: number;
  /** per completed data set, on the pooling scale: the estimates Q_l and their variances U_l (what R's pool.scalar takes) */
  perImputation: { estimate: number[]; variance: number[] };
  /** the complete-case estimate beside it, on the metric's scale, and whether the two disagree (DISAGREEMENT_RULE) */
  completeCase: { estimate: number; lower: number; upper: number } | null;
  disagrees: boolean;
}

/** Observed against imputed values of one imputed column: shares per bin (numeric) or per level. */
export interface ImputedColumnDiagnostic {
  column: string;
  kind: 'numeric' | 'binary' | 'categorical';
  imputedBy: string;
  missing: number;
  bins: { label: string; from?: number; to?: number; observed: number; imputed: number }[];
  observedMean: number | null;
  imputedMean: number | null;
}

/** How the patients left out of the complete cases differ from those kept, in their observed values. */
export interface LeftOutComparison {
  column: string;
  kind: 'numeric' | 'categorical';
  /** numeric: mean and SD of observed values in each group; null where the group has none observed */
  kept: { observed: number; mean: number | null; sd: number | null; levels?: { level: string; share: number }[] };
  leftOut: { observed: number; mean: number | null; sd: number | null; levels?: { level: string; share: number }[] };
  /** (mean left out − mean kept) / pooled SD, numeric only */
  standardizedDifference: number | null;
}

export interface MissingDataResult {
  method: MissingDataMethod;
  rows: number;
  rowsWithGaps: number;
  shareIncomplete: number;
  gapsByColumn: Record<string, number>;
  /** rows sharing each combination of columns with gaps, most frequent first */
  patterns: { columns: string[]; rows: number }[];
  completeCase: {
    n: number;
    events: number;
    leftOut: number;
    leftOutEvents: number;
    eventRateKept: number | null;
    eventRateLeftOut: number | null;
    comparison: LeftOutComparison[];
  };
  imputed: {
    imputations: number;
    iterations: number;
    seed: number;
    donors: number;
    extraColumns: string[];
    method: string;
    pooling: string;
    curvePooling: string;
    metrics: PooledFigure[];
    /** completed sets in which a calibration fit failed (that figure is then not pooled) */
    failedFits: { calibrationIntercept: number; calibrationSlope: number };
    averaged: {
      brier: number;
      scaledBrier: number;
      logLoss: number;
      ici: number;
      e50: number;
      e90: number;
      emax: number;
    };
    events: number;
    n: number;
    rocCurve: { fpr: number[]; tpr: number[] };
    calibrationCurve: { p: number[]; observed: number[] };
    diagnostics: ImputedColumnDiagnostic[];
  } | null;
  /** why there is no imputed analysis, when the method asked for one */
  imputedNote?: string;
  warnings: string[];
  rules: { incompleteShare: string; disagreement: string };
  /** which figures the rest of the run page shows */
  mainAnalysis: string;
}
