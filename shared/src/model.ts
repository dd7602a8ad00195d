import { z } from 'zod';

/** How a predictor column enters the linear predictor. */
export const TRANSFORMS = ['linear', 'log', 'indicator', 'rcs'] as const;
export type Transform = (typeof TRANSFORMS)[number];

export const predictorSchema = z
  .object({
    column: z.string().trim().min(1).max(80),
    coefficient: z.number().finite(),
    transform: z.enum(TRANSFORMS).default('linear'),
    /** indicator: the category value that gives 1 (compared as text). */
    level: z.string().max(80).optional(),
    /** the unit the coefficient assumes (years, days, mmol/L…), shown when a cohort's columns are mapped */
    unit: z.string().trim().max(30).optional(),
    /** rcs: the knots (ascending, at least 3) and which basis term (1 … knots − 2) this coefficient multiplies. */
    knots: z.array(z.number().finite()).min(3).max(10).optional(),
    term: z.number().int().min(1).max(8).optional(),
  })
  .superRefine((p, ctx) => {
    if (p.transform === 'indicator' && p.level === undefined)
      ctx.addIssue({ code: 'custom', message: `${p.column}: an indicator needs a level` });
    if (p.transform === 'rcs') {
      if (!p.knots || p.term === undefined)
        ctx.addIssue({ code: 'custom', message: `${p.column}: a spline term needs knots and term` });
      else if (p.term > p.knots.length - 2)
        ctx.addIssue({ code: 'custom', message: `${p.column}: term must be at most knots − 2` });
      else if (p.knots.some((k, i) => i > 0 && k <= p.knots![i - 1]))
        ctx.addIssue({ code: 'custom', message: `${p.column}: knots must ascend` });
    }
  });
export type Predictor = z.infer<typeof predictorSchema>;

/** The score formula: logit(p) = intercept + Σ coefficient · transform(column). Same shape as the CLI's --model file. */
export const scoreModelSchema = z.object({
  intercept: z.number().finite(),
  predictors: z.array(predictorSchema).max(200),
});
export type ScoreModel = z.infer<typeof scoreModelSchema>;
