import { z } from 'zod';
import type { MissingnessSummary } from './missingness';

// Request and response shapes for cohort uploads, column mappings and stored cohort versions.

const isoDate = z.string().regex(/^\d{4}-\d{2}-\d{2}$/, 'use YYYY-MM-DD');
const optionalText = (max: number) =>
  z.preprocess((v) => (v === '' ? undefined : v), z.string().trim().max(max).optional());

/** The text fields that travel with the multipart upload (field `file` carries the CSV). */
export const uploadFields = z
  .object({
    cohortId: z.preprocess((v) => (v === '' ? undefined : v), z.string().uuid().optional()),
    cohortName: optionalText(160),
    scoreVersionId: z.string().uuid('scoreVersionId must be a score version id'),
    label: optionalText(160),
    periodStart: z.preprocess((v) => (v === '' ? undefined : v), isoDate.optional()),
    periodEnd: z.preprocess((v) => (v === '' ? undefined : v), isoDate.optional()),
  })
  .refine((f) => !!f.cohortId !== !!f.cohortName, {
    message: 'give either cohortId (a new version of a cohort) or cohortName (a new cohort)',
  })
  .refine((f) => !f.periodStart || !f.periodEnd || f.periodStart <= f.periodEnd, {
    message: 'periodStart must not be after periodEnd',
  });
export type UploadFields = z.infer<typeof uploadFields>;

const label = z.string().trim().min(1).max(40);

/** File column → each score predictor, the outcome with its labels, an optional period column, subgroup columns. */
export const columnMapping = z.object({
  predictors: z.record(z.string().min(1).max(80), z.string().min(1).max(200)),
  outcome: z.object({
    column: z.string().min(1).max(200),
    positive: z.array(label).min(1).max(10).default(['1']),
    negative: z.array(label).min(1).max(10).default(['0']),
  }),
  date: z
    .object({ column: z.string().min(1).max(200) })
    .nullable()
    .optional(),
  subgroups: z
    .record(
      z
        .string()
        .trim()
        .min(1)
        .max(60)
        .regex(/^[A-Za-z][A-Za-z0-9_ ]*$/, 'subgroup names are letters, digits, _ and spaces'),
      z.string().min(1).max(200),
    )
    .default({}),
  /** Optional plausible range per predictor; age gets 0–120 and a supplied probability [0, 1] by default. */
  ranges: z
    .record(z.string(), z.object({ min: z.number().finite().optional(), max: z.number().finite().optional() }))
    .default({}),
  /**
   * Per text predictor, the steward's confirmed reading of the file's labels: file label → the formula's level it means,
   * or '' for "none of the formula's levels". Applied to the rows as they are stored (Y → yes).
   */
  labels: z.record(z.string().min(1).max(80), z.record(z.string().min(1).max(80), z.string().max(80))).optional(),
  /**
   * Predictors whose empty cells are gaps (stored as missing) rather than rejected rows; the steward says so per
   * predictor (absent: none). The outcome and the period column never have gaps (gapPermissionProblems).
   */
  predictorsWithGaps: z.array(z.string().min(1).max(80)).max(200).optional(),
});
export type ColumnMappingSpec = z.infer<typeof columnMapping>;

/** Why a mapping's predictorsWithGaps cannot stand: only mapped predictors, never the outcome's or period's file column. */
export function gapPermissionProblems(m: {
  predictors: Record<string, string>;
  outcome: { column: string };
  date?: { column: string } | null;
  predictorsWithGaps?: string[];
}): string[] {
  const problems: string[] = [];
  const listed = m.predictorsWithGaps ?? [];
  if (new Set(listed).size !== listed.length) problems.push('predictorsWithGaps lists a predictor twice');
  for (const name of listed) {
    const col = m.predictors[name];
    if (col === undefined)
      problems.push(`"${name}" is not a mapped predictor: only predictors may have gaps, never the outcome or period`);
    else if (col === m.outcome.column)
      problems.push(`"${name}" reads the outcome column "${col}", and the outcome never has gaps`);
    else if (m.date && col === m.date.column)
      problems.push(`"${name}" reads the period column "${col}", and the period never has gaps`);
  }
  return problems;
}

/** A mapping as a steward sends it: gaps permitted only where a predictor may have them (gapPermissionProblems). */
export const checkedColumnMapping = columnMapping.superRefine((m, ctx) => {
  for (const message of gapPermissionProblems(m))
    ctx.addIssue({ code: 'custom', path: ['predictorsWithGaps'], message });
});

export const mappingRequest = z.object({
  mapping: checkedColumnMapping,
  /** Also keep the mapping under this name for the next period's file. */
  saveAs: z.string().trim().min(1).max(160).optional(),
});

export const commitRequest = z.object({
  excludeRejected: z.boolean().default(false),
  /** Or the rejected rows the steward chose to exclude, by line number (every rejected row must be chosen or fixed). */
  excludeLines: z.array(z.number().int().min(1)).max(100_000).optional(),
});

export const saveMappingRequest = z.object({
  name: z.string().trim().min(1).max(160),
  cohortId: z.string().uuid().nullable().optional(),
  mapping: checkedColumnMapping,
});

export const pageQuery = z.object({
  page: z.coerce.number().int().min(1).max(1_000_000).default(1),
  pageSize: z.coerce.number().int().min(1).max(500).default(25),
});

export const cohortListQuery = pageQuery.extend({
  search: z.string().trim().max(160).optional(),
  sortBy: z.enum(['name', 'createdAt', 'versions', 'latestRows']).default('createdAt'),
  sortDir: z.enum(['asc', 'desc']).default('desc'),
});

export const cohortRowsQuery = pageQuery.extend({
  search: z.string().trim().max(160).optional(),
  sortBy: z
    .string()
    .trim()
    .max(80)
    .regex(/^[A-Za-z0-9_ .:-]+$/)
    .default('line_no'),
  sortDir: z.enum(['asc', 'desc']).default('asc'),
});

export const mappingListQuery = z.object({ cohortId: z.string().uuid().optional() });

/** GET /api/uploads/:id?waitSeconds=N: while the rows are being checked, answer when the check ends or after N s. */
export const uploadQuery = z.object({ waitSeconds: z.coerce.number().int().min(0).max(30).default(0) });

export const versionParams = z.object({ id: z.string().uuid(), version: z.coerce.number().int().min(1).max(100_000) });
export const uuidParam = z.object({ id: z.string().uuid('id must be a uuid') });

export type UploadStatus = 'pending' | 'processing' | 'checked' | 'committed' | 'failed' | 'refused' | 'discarded';

export interface ScreenFinding {
  column: string;
  category: string;
  reason: string;
}

export interface NumericSummary {
  kind: 'numeric';
  n: number;
  missing: number;
  min: number | null;
  max: number | null;
  mean: number | null;
  /** Equal-width bins over [min, max]; counted from every value when small, else from a seeded sample. */
  histogram: { from: number; to: number; count: number }[];
  histogramSampled: boolean;
}
export interface CategoricalSummary {
  kind: 'categorical';
  n: number;
  missing: number;
  levels: { value: string; count: number }[];
  otherLevels: number;
}
export type ColumnSummary = NumericSummary | CategoricalSummary;

export interface UploadView {
  id: string;
  status: UploadStatus;
  cohortId: string | null;
  cohortName: string | null;
  scoreVersionId: string;
  label: string;
  periodStart: string | null;
  periodEnd: string | null;
  sourceFilename: string;
  sha256: string;
  bytes: number;
  delimiter: string;
  headers: string[];
  warnings: ScreenFinding[];
  suggestedMapping: ColumnMappingSpec | null;
  mapping: ColumnMappingSpec | null;
  progress: number;
  rowsRead: number;
  rowsAccepted: number;
  rowsRejected: number;
  events: number;
  rejectionCounts: { reason: string; count: number }[];
  columnSummary: Record<string, ColumnSummary>;
  /** After the check: missing values of the accepted rows (gaps where the mapping allows them). */
  missingness: MissingnessSummary | null;
  cohortVersionId: string | null;
  error: string | null;
  createdAt: string;
  /** The score's columns the mapping must cover (from the score version), with what the formula expects of each. */
  requiredPredictors: RequiredPredictorView[];
  /** Indicator columns whose labels do not match the formula's levels: the upload cannot be stored until each is resolved. */
  codingIssues: CodingIssue[];
}

export interface RequiredPredictorView {
  column: string;
  kind: 'numeric' | 'text';
  positiveOnly: boolean;
  /** how the column enters the formula: linear, log, indicator, rcs (one column may feed several terms) */
  transforms: string[];
  /** indicator levels the formula names (the value that gives 1) */
  levels: string[];
  unit: string | null;
  /** the plausible range the row checks apply (null bounds: none) */
  range: { min: number | null; max: number | null };
}

export interface CodingIssue {
  predictor: string;
  fileColumn: string;
  /** the levels the formula names for this column */
  levels: string[];
  /** levels that never occur in the checked rows */
  absent: string[];
  /** labels in the column that the formula does not name and the steward has not confirmed */
  unnamed: { value: string; count: number }[];
  message: string;
}
