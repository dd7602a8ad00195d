// Recalibration of a formula score version from a completed run: the preview and the proposed draft version (the fit
// itself is recalibrationFit.ts, run in a pool thread).
import type { Derivation, RecalibrationMethod } from '@shared/drift';
import { RECALIBRATION_BANNER } from '@shared/drift';
import { dataSource } from '../../platform/database/dataSource';
import { ValidationRun } from '../../platform/database/entities/ValidationRun';
import type { AuthUser } from '../accounts/actor';
import { conflict, notFound } from '../errors';
import { transformModel } from '../../stats/recalibration';
import { appendAudit } from '../accounts/audit';
import { recalibrateInPool } from '../../jobs/threads/pool';
import { createScoreVersion, scoreVersionDto } from '../scores/scores';
import { scoreInputOf, versionById } from './timeline';

// ---------------------------------------------------------------- recalibration

/** Checks the run and its version here; the cohort is loaded and the fit made in a pool thread (jobs/threads/pool.ts). */
async function recalibrationFit(runId: string, method: RecalibrationMethod) {
  const run = await dataSource.getRepository(ValidationRun).findOne({
    select: { id: true, status: true, scoreVersionId: true, cohortVersionId: true },
    where: { id: runId },
  });
  if (!run) throw notFound('validation run');
  if (run.status !== 'completed') throw conflict(`the run is ${run.status}; only a completed run can be recalibrated`);
  const version = await versionById(run.scoreVersionId);
  if (version.mode !== 'formula' || !version.model)
    throw conflict(
      'this score version uses supplied probabilities and has no formula to transform; recalibration needs a formula version',
    );
  const answer = await recalibrateInPool({
    cohortVersionId: run.cohortVersionId,
    score: scoreInputOf(version),
    method,
  });
  if (!answer.ok) throw conflict(answer.message);
  return { version, derivation: answer.derivation, fit: answer.fit };
}

export async function recalibrationPreview(runId: string, method: RecalibrationMethod): Promise<Derivation> {
  return (await recalibrationFit(runId, method)).derivation;
}

export async function recalibrate(actor: AuthUser, runId: string, method: RecalibrationMethod, ip: string) {
  const input = await recalibrationFit(runId, method);
  const { derivation, fit } = input;
  if (!fit)
    throw conflict('closed testing keeps the original score (no update is significant); no new version was proposed');
  const model = transformModel(input.version.model!, fit.a.estimate, fit.b.estimate);
  const sv = await createScoreVersion(
    actor,
    input.version.score_id,
    {
      mode: 'formula',
      model,
      changeNote: `Recalibrated (${method}) from run ${runId}`,
      derivedFromRunId: runId,
      derivation: derivation as unknown as Record<string, unknown>,
    },
    ip,
  );
  await appendAudit({
    actorId: actor.id,
    actorEmail: actor.email,
    action: 'score_version.recalibrated',
    targetType: 'score_version',
    targetId: sv.id,
    sourceIp: ip,
    details: {
      fromRunId: runId,
      fromScoreVersionId: input.version.id,
      method,
      chosen: derivation.chosen,
      a: fit.a.estimate,
      b: fit.b.estimate,
    },
  });
  return { version: await scoreVersionDto(sv), derivation, banner: RECALIBRATION_BANNER };
}
