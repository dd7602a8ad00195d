import type { Request, Response } from 'express';
import type { RunListQuery } from '@shared/runs';
import { currentUser, sourceIp } from '../middleware/auth';
import * as runs from '../../domain/runs/runs';

export async function create(req: Request, res: Response) {
  res.status(201).json({ run: await runs.createRun(currentUser(req), req.body, sourceIp(req)) });
}

export async function list(req: Request, res: Response) {
  res.json(await runs.listRuns(req.query as unknown as RunListQuery));
}

export async function get(req: Request, res: Response) {
  res.json({ run: await runs.getRun(String(req.params.id)) });
}

export async function reproduce(req: Request, res: Response) {
  res.json(await runs.reproduceRun(currentUser(req), String(req.params.id), sourceIp(req)));
}

export async function compare(req: Request, res: Response) {
  const q = req.query as unknown as { a: string; b: string };
  res.json(await runs.compareRuns(q.a, q.b));
}

export async function options(_req: Request, res: Response) {
  res.json(await runs.runOptions());
}
