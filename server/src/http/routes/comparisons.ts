// Thin handlers for score comparisons (two score versions on the same patients): create, list, read.
import type { Request, Response } from 'express';
import type { CreateScoreComparisonRequest, ScoreComparisonListQuery } from '@shared/scoreComparison';
import { currentUser, sourceIp } from '../middleware/auth';
import * as comparisons from '../../domain/comparisons/comparisons';

export async function create(req: Request, res: Response) {
  const body = req.body as CreateScoreComparisonRequest;
  res.status(201).json({ comparison: await comparisons.createComparison(currentUser(req), body, sourceIp(req)) });
}

export async function list(req: Request, res: Response) {
  res.json(await comparisons.listComparisons(req.query as unknown as ScoreComparisonListQuery));
}

export async function get(req: Request, res: Response) {
  res.json({ comparison: await comparisons.getComparison(String(req.params.id)) });
}

export async function reproduce(req: Request, res: Response) {
  res.json(await comparisons.reproduceComparison(currentUser(req), String(req.params.id), sourceIp(req)));
}
