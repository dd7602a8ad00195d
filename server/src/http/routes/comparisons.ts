// Thin handlers for score comparisons (two score versions on the same patients): queue, list, read, reproduce.
import type { Request, Response } from 'express';
import type { CreateScoreComparisonRequest, ScoreComparisonListQuery } from '@shared/scoreComparison';
import { currentUser, sourceIp } from '../middleware/auth';
import * as comparisons from '../../domain/comparisons/comparisons';

/** 202: the comparison is stored queued with its job; GET /api/comparisons/:id?waitSeconds=N follows it to its end. */
export async function create(req: Request, res: Response) {
  const body = req.body as CreateScoreComparisonRequest;
  res.status(202).json({ comparison: await comparisons.createComparison(currentUser(req), body, sourceIp(req)) });
}

export async function list(req: Request, res: Response) {
  res.json(await comparisons.listComparisons(req.query as unknown as ScoreComparisonListQuery));
}

export async function get(req: Request, res: Response) {
  const { waitSeconds } = req.query as unknown as { waitSeconds: number };
  res.json({ comparison: await comparisons.getComparison(String(req.params.id), undefined, waitSeconds) });
}

export async function reproduce(req: Request, res: Response) {
  res.json(await comparisons.reproduceComparison(currentUser(req), String(req.params.id), sourceIp(req)));
}
