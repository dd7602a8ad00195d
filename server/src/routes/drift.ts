import type { Request, Response } from 'express';
import type { SampleSizeQuery } from '@shared/drift';
import { planSampleSize } from '../stats/sampleSize';

/** The sample-size planner (Riley et al. 2021): required n and events per criterion and the largest. */
export async function sampleSize(req: Request, res: Response) {
  res.json(planSampleSize(req.query as unknown as SampleSizeQuery));
}
