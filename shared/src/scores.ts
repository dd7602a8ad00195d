// Score registry: request schemas and response types shared by the API and the client forms.
import { z } from 'zod';
import { scoreModelSchema } from './model';
import type { ScoreModel } from './model';

const text = (max: number) => z.string().trim().min(1, 'required').max(max);

/** The description of a score: what it predicts, for whom, where it was published, and what clinicians must read. */
export const scoreFields = {
  name: text(160),
  outcomeDefinition: text(4000),
  timeHorizon: text(120),
  intendedPopulation: text(4000),
  citation: text(2000),
  // Optional; blank means none, and a pasted https://doi.org/ link is reduced to the DOI itself.
  doi: z
    .preprocess(
      (v) => (typeof v === 'string' ? v.trim().replace(/^https?:\/\/(dx\.)?doi\.org\//i, '') || null : v),
      z
        .string()
        .max(200)
        .regex(/^10\.\d{4,9}\/\S+$/, 'doi must look like 10.1234/abc')
        .nullable(),
    )
    .optional(),
  cautionText: text(4000),
};

export const createScoreRequest = z.object(scoreFields);
export type CreateScoreRequest = z.infer<typeof createScoreRequest>;

export const updateScoreRequest = z
  .object(scoreFields)
  .partial()
  .refine((v) => Object.values(v).some((x) => x !== undefined), 'nothing to change');
export type UpdateScoreRequest = z.infer<typeof updateScoreRequest>;

/** Extra rules a whole formula must meet beyond each predictor being valid on its own. */
function checkModel(model: ScoreModel, ctx: z.RefinementCtx, path: (string | number)[]) {
  const seen = new Set<string>();
  const knotsByColumn = new Map<string, string>();
  model.predictors.forEach((p, i) => {
    const key = `${p.column}|${p.transform}|${p.transform === 'indicator' ? p.level : ''}|${p.transform === 'rcs' ? p.term : ''}`;
    if (seen.has(key))
      ctx.addIssue({
        code: 'custom',
        path: [...path, 'predictors', i],
        message: `${p.column}: the same term appears twice`,
      });
    seen.add(key);
    // A blank level would count missing cells as the category; say which level is meant.
    if (p.transform === 'indicator' && p.level !== undefined && p.level.trim() === '')
      ctx.addIssue({
        code: 'custom',
        path: [...path, 'predictors', i, 'level'],
        message: `${p.column}: an indicator needs a level that is not blank`,
      });
    if (p.transform === 'rcs' && p.knots) {
      // Every basis term of one spline is built from the same knots; different knots would be a different spline.
      const k = JSON.stringify(p.knots);
      const first = knotsByColumn.get(p.column);
      if (first !== undefined && first !== k)
        ctx.addIssue({
          code: 'custom',
          path: [...path, 'predictors', i, 'knots'],
          message: `${p.column}: all spline terms of a column must use the same knots`,
        });
      if (first === undefined) knotsByColumn.set(p.column, k);
    }
  });
}

/** A formula as stored and as exchanged: the same shape as the validation CLI's --model file. */
export const scoreModelFile = scoreModelSchema.superRefine((m, ctx) => checkModel(m, ctx, []));

const columnName = z.string().trim().min(1, 'required').max(80);
const changeNote = z.string().trim().max(4000).optional();

const formulaVersion = z
  .object({ mode: z.literal('formula'), model: scoreModelSchema, changeNote })
  .superRefine((v, ctx) => checkModel(v.model, ctx, ['model']));
const suppliedVersion = z.object({ mode: z.literal('supplied'), probabilityColumn: columnName, changeNote });

/**
 * Body of POST /api/scores/:id/versions: a version ({mode:'formula', model} or {mode:'supplied', probabilityColumn}),
 * or an imported --model file ({intercept, predictors}, optionally with changeNote) which is read as mode 'formula'.
 */
export const createScoreVersionRequest = z.preprocess(
  (raw) => {
    if (
      raw &&
      typeof raw === 'object' &&
      !Array.isArray(raw) &&
      !('mode' in raw) &&
      ('intercept' in raw || 'predictors' in raw)
    ) {
      const { changeNote: note, ...model } = raw as Record<string, unknown>;
      return { mode: 'formula', model, changeNote: note };
    }
    return raw;
  },
  z.discriminatedUnion('mode', [formulaVersion, suppliedVersion]),
);
export type CreateScoreVersionRequest = z.infer<typeof createScoreVersionRequest>;

/** Version 1 is the published formula; every later version must say what changed. */
export function changeNoteProblem(version: number, note: string | undefined | null): string | null {
  if (version >= 2 && !note?.trim())
    return `a change note is required for version ${version}: say what changed from the previous version`;
  return null;
}

export const scoreIdParam = z.object({ id: z.string().uuid('id must be a UUID') });
export const scoreVersionParams = z.object({
  id: z.string().uuid('id must be a UUID'),
  version: z.coerce.number().int('version must be a whole number').min(1, 'version must be 1 or more'),
});

export const CLINICAL_STATUSES = ['not approved', 'approved', 'revoked'] as const;
export type ClinicalStatus = (typeof CLINICAL_STATUSES)[number];
export const CLINICAL_STATUS_LABELS: Record<ClinicalStatus, string> = {
  'not approved': 'not approved',
  approved: 'approved for clinical use',
  revoked: 'revoked',
};

export const TRANSFORM_LABELS = {
  linear: 'linear',
  log: 'natural log',
  indicator: 'level indicator',
  rcs: 'spline term (RCS)',
} as const;

// --- responses -------------------------------------------------------------------------------

export interface ScoreVersionDto {
  id: string;
  scoreId: string;
  version: number;
  mode: 'formula' | 'supplied';
  model: ScoreModel | null;
  probabilityColumn: string | null;
  changeNote: string;
  derivedFromRunId: string | null;
  derivation: Record<string, unknown> | null;
  locked: boolean;
  clinicalStatus: ClinicalStatus;
  approvedRunId: string | null;
  createdBy: string | null;
  createdByName: string | null;
  createdAt: string;
}

export interface ScoreDto {
  id: string;
  name: string;
  outcomeDefinition: string;
  timeHorizon: string;
  intendedPopulation: string;
  citation: string;
  doi: string | null;
  cautionText: string;
  createdBy: string | null;
  createdAt: string;
  updatedAt: string;
}

export interface ScoreSummaryDto extends ScoreDto {
  versionCount: number;
  latestVersion: number | null;
  approvedVersions: number[];
}

/** File name for an exported formula, e.g. "kestrel-30-day-readmission-score-v2.model.json". */
export function modelFileName(scoreName: string, version: number): string {
  const slug =
    scoreName
      .toLowerCase()
      .replace(/[^a-z0-9]+/g, '-')
      .replace(/^-+|-+$/g, '')
      .slice(0, 80) || 'score';
  return `${slug}-v${version}.model.json`;
}
