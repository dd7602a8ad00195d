// Thin handlers for review, sign-off, comments, the chair's queue, score cards, the report and the dev outbox.
import type { Request, Response } from 'express';
import type { CommentRequest, ReviewRequest, RevokeRequest, SignoffRequest } from '@shared/governance';
import { config } from '../../platform/config';
import { currentUser, sourceIp } from '../middleware/auth';
import { notFound } from '../middleware/errors';
import { receivedMessages } from '../../platform/mail/fakeSmtp';
import * as governance from '../../domain/governance/governance';
import { recentOutbox } from '../../domain/notifications/mail';
import { runReport } from '../../domain/reports/report';
import { getScoreCard, listScoreCards } from '../../domain/reports/scorecards';

const id = (req: Request) => (req.params as { id: string }).id;

export async function getReview(req: Request, res: Response) {
  res.json(await governance.getRunGovernance(currentUser(req), id(req)));
}

export async function postReview(req: Request, res: Response) {
  res.status(201).json(await governance.reviewRun(currentUser(req), id(req), req.body as ReviewRequest, sourceIp(req)));
}

export async function signoff(req: Request, res: Response) {
  res
    .status(201)
    .json(await governance.signoffRun(currentUser(req), id(req), req.body as SignoffRequest, sourceIp(req)));
}

export async function revoke(req: Request, res: Response) {
  res
    .status(201)
    .json(await governance.revokeApproval(currentUser(req), id(req), req.body as RevokeRequest, sourceIp(req)));
}

export async function listComments(req: Request, res: Response) {
  res.json(await governance.listComments(id(req)));
}

export async function addComment(req: Request, res: Response) {
  res
    .status(201)
    .json(await governance.addComment(currentUser(req), id(req), (req.body as CommentRequest).body, sourceIp(req)));
}

export async function queue(req: Request, res: Response) {
  res.json(await governance.signoffQueue(currentUser(req)));
}

export async function scorecards(_req: Request, res: Response) {
  res.json(await listScoreCards());
}

export async function scorecard(req: Request, res: Response) {
  res.json(await getScoreCard((req.params as { versionId: string }).versionId));
}

export async function report(req: Request, res: Response) {
  res.json(await runReport(id(req)));
}

/** Development only: what the local fake SMTP server received, and the outbox rows behind it. */
export async function devOutbox(_req: Request, res: Response) {
  if (!config.devOutbox) throw notFound('dev outbox (disabled outside development)');
  res.json({ received: receivedMessages(), outbox: await recentOutbox() });
}
