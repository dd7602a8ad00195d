import type { Request, Response } from 'express';
import { modelFileName, scoreVersionParams } from '@shared/scores';
import { currentUser, sourceIp } from '../middleware/auth';
import * as scores from '../../domain/scores/scores';
import { cohortTemplateCsv } from '../../domain/cohorts/uploadMapping';

// The table validates params; parse again here for their types (":version" arrives as text).
const versionParams = (req: Request) => scoreVersionParams.parse(req.params);

export async function list(_req: Request, res: Response) {
  res.json({ scores: await scores.listScores() });
}

export async function create(req: Request, res: Response) {
  res.status(201).json({ score: await scores.createScore(currentUser(req), req.body, sourceIp(req)) });
}

export async function get(req: Request, res: Response) {
  const id = String(req.params.id);
  const score = scores.toScoreDto(await scores.getScore(id));
  res.json({ score, versions: await scores.listScoreVersions(id) });
}

export async function update(req: Request, res: Response) {
  res.json({ score: await scores.updateScore(currentUser(req), String(req.params.id), req.body, sourceIp(req)) });
}

export async function listVersions(req: Request, res: Response) {
  res.json({ versions: await scores.listScoreVersions(String(req.params.id)) });
}

export async function createVersion(req: Request, res: Response) {
  const row = await scores.createScoreVersion(currentUser(req), String(req.params.id), req.body, sourceIp(req));
  res
    .status(201)
    .location(`/api/scores/${row.scoreId}/versions/${row.version}`)
    .json({ version: await scores.scoreVersionDto(row) });
}

export async function getVersion(req: Request, res: Response) {
  const { id, version } = versionParams(req);
  res.json({ version: await scores.scoreVersionDto(await scores.getScoreVersionByNumber(id, version)) });
}

export async function editVersion(req: Request, _res: Response) {
  const { id, version } = versionParams(req);
  await scores.refuseVersionEdit(id, version);
}

export async function exportVersion(req: Request, res: Response) {
  const { id, version } = versionParams(req);
  const out = await scores.exportScoreModel(id, version);
  res
    .status(200)
    .type('application/json')
    .attachment(modelFileName(out.score.name, out.version.version))
    .send(`${JSON.stringify(out.model, null, 2)}\n`);
}

/** A CSV with the columns a cohort file needs for this score version (header only), to fill in and upload. */
export async function cohortTemplate(req: Request, res: Response) {
  const { id, version } = versionParams(req);
  const [score, v] = [await scores.getScore(id), await scores.getScoreVersionByNumber(id, version)];
  const base =
    score.name
      .toLowerCase()
      .replace(/[^a-z0-9]+/g, '-')
      .replace(/^-|-$/g, '')
      .slice(0, 60) || 'score';
  res
    .status(200)
    .type('text/csv; charset=utf-8')
    .attachment(`${base}-v${v.version}-cohort-template.csv`)
    .send(cohortTemplateCsv(v));
}
