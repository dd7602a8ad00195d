// What a cohort version's page shows about missing values: per column, per subgroup level, per period, and which
// predictors are missing together. Worked out by the upload check (server/src/domain/cohorts/missingness.ts) while it
// reads every row, stored with the version, and only read afterwards.

/** Rows of one subgroup level or one period, and how many of them miss each predictor. */
export interface MissingnessGroup {
  /** The level or period label as uploaded; null: not recorded. */
  level: string | null;
  rows: number;
  events: number;
  /** Rows missing at least one predictor. */
  rowsWithGaps: number;
  /** Per predictor, in the order of `MissingnessSummary.predictors`. */
  missing: number[];
}

/** One combination of predictors missing together; `missing: []` is the rows with every predictor. */
export interface MissingnessPattern {
  missing: string[];
  rows: number;
  events: number;
}

export interface MissingnessSummary {
  rows: number;
  events: number;
  /** The score's columns, in the order of the mapping. */
  predictors: string[];
  /** The predictors the steward said may have gaps. */
  gapsAllowed: string[];
  /** Every mapped column that can be empty: the predictors, then the subgroup columns, then the period. */
  byColumn: { column: string; role: 'predictor' | 'subgroup' | 'period'; missing: number }[];
  rowsWithGaps: number;
  eventsWithGaps: number;
  /** Per subgroup column, its levels by number of rows (at most MISSINGNESS_LIMITS.levels; `otherLevels` not listed). */
  bySubgroup: { subgroup: string; levels: MissingnessGroup[]; otherLevels: number }[];
  /** Per period label in time order, rows without a period last (level null); null when no period column is mapped. */
  byPeriod: MissingnessGroup[] | null;
  /** Most frequent first, at most MISSINGNESS_LIMITS.patterns; the rest summed in `otherPatterns`. */
  patterns: MissingnessPattern[];
  otherPatterns: { patterns: number; rows: number; events: number } | null;
}

export const MISSINGNESS_LIMITS = { levels: 100, periods: 400, patterns: 50 } as const;

/** The share a count is of a total, 0 for an empty total (never NaN in a table). */
export const shareOf = (count: number, total: number): number => (total > 0 ? count / total : 0);
