import type { Request, Response } from 'express';
import type { RunListQuery } from '@shared/runs';
import { currentUser, sourceIp } from '../middleware/auth';
import { ResponseCache, sendJsonBody } from '../services/responseCache';
import * as runs from '../services/runs';

// Pages of completed runs, serialized once (services/responseCache.ts says when they are dropped); a run that is not
// completed yet is read afresh every time. The answer is the same for every role allowed to read it.
export const completedRunPages = new ResponseCache(64);
export const runPageKey = (params: Record<string, unknown>) => String(params.id);

export async function create(req: Request, res: Response) {
  res.status(201).json({ run: await runs.createRun(currentUser(req), req.body, sourceIp(req)) });
}

export async function list(req: Request, res: Response) {
  res.json(await runs.listRuns(req.query as unknown as RunListQuery));
}

export async function get(req: Request, res: Response) {
  const id = String(req.params.id);
  const page = await completedRunPages.get(runPageKey(req.params), async () => {
    const run = await runs.getRun(id);
    return { value: { run }, keep: run.status === 'completed' };
  });
  sendJsonBody(req, res, page);
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
