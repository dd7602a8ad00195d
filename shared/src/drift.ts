import { z } from 'zod';

/** GET /api/sample-size: anticipated event rate and C, and at least one target 95% CI width. */
export const sampleSizeQuery = z
  .object({
    eventRate: z.coerce.number().gt(0).lt(1),
    auc: z.coerce.number().gt(0.5).lt(1),
    ciWidthAuc: z.coerce.number().gt(0).lt(1).optional(),
    ciWidthOE: z.coerce.number().gt(0).lt(10).optional(),
    ciWidthSlope: z.coerce.number().gt(0).lt(5).optional(),
  })
  .refine((q) => q.ciWidthAuc !== undefined || q.ciWidthOE !== undefined || q.ciWidthSlope !== undefined, {
    message: 'give at least one of ciWidthAuc, ciWidthOE, ciWidthSlope',
  });
export type SampleSizeQuery = z.infer<typeof sampleSizeQuery>;
