import type { Request, Response } from 'express';
import type {
  AlertAckBody,
  AlertBulkAckBody,
  AlertRuleBody,
  DriftRunChoice,
  RecalibrationBody,
  SampleSizeQuery,
} from '@shared/drift';
import * as alerts from '../../domain/drift/alerts';
import * as alertRules from '../../domain/drift/alertRules';
import * as recalibration from '../../domain/drift/recalibration';
import { scoreVersionParams } from '@shared/scores';
import { currentUser, sourceIp } from '../middleware/auth';
import { driftForVersion } from '../../domain/drift/timeline';
import { chooseDriftRun } from '../../domain/drift/driftRunChoice';
import { planSampleSize } from '../../stats/sampleSize';
import { predictedRisksOfRun } from '../../domain/drift/sampleSizeRisks';

/** The sample-size planner (Riley et al. 2021): required n and events per criterion and the largest. */
export async function sampleSize(req: Request, res: Response) {
  const q = req.query as unknown as SampleSizeQuery;
  // the empirical LP distribution: the predicted risks a completed run stored (read, not recomputed, on this thread)
  const risks = q.lpDistribution === 'cohort' && q.ciWidthSlope ? await predictedRisksOfRun(q.runId!) : undefined;
  res.json(planSampleSize({ ...q, risks }));
}

/** Per-period figures with funnel limits, per-patient CUSUM and O − E, and the alerts of one score version. */
export async function timeline(req: Request, res: Response) {
  const { id, version } = scoreVersionParams.parse(req.params);
  res.json(await driftForVersion(id, version));
}

export async function listAlerts(req: Request, res: Response) {
  const q = req.query as { score?: string };
  res.json({ alerts: await alerts.listAlerts({ scoreId: q.score }) });
}

export async function acknowledgeMany(req: Request, res: Response) {
  const body = req.body as AlertBulkAckBody;
  res.json({ alerts: await alerts.acknowledgeAlerts(currentUser(req), body.ids, body.note, sourceIp(req)) });
}

export async function acknowledge(req: Request, res: Response) {
  const body = req.body as AlertAckBody;
  res.json({ alert: await alerts.acknowledgeAlert(currentUser(req), String(req.params.id), body.note, sourceIp(req)) });
}

export async function listRules(req: Request, res: Response) {
  res.json({ rules: await alertRules.listAlertRules(String(req.params.id)) });
}

export async function createRule(req: Request, res: Response) {
  res.status(201).json({
    rule: await alertRules.createAlertRule(
      currentUser(req),
      String(req.params.id),
      req.body as AlertRuleBody,
      sourceIp(req),
    ),
  });
}

export async function recalibrationPreview(req: Request, res: Response) {
  res.json({
    derivation: await recalibration.recalibrationPreview(String(req.params.id), (req.body as RecalibrationBody).method),
  });
}

export async function recalibrate(req: Request, res: Response) {
  res
    .status(201)
    .json(
      await recalibration.recalibrate(
        currentUser(req),
        String(req.params.id),
        (req.body as RecalibrationBody).method,
        sourceIp(req),
      ),
    );
}

/** The statistician chooses which run of a cohort version the timeline takes (null: the newest completed). */
export async function chooseRun(req: Request, res: Response) {
  const { id, version } = scoreVersionParams.parse(req.params);
  res.json({ choice: await chooseDriftRun(currentUser(req), id, version, req.body as DriftRunChoice, sourceIp(req)) });
}
