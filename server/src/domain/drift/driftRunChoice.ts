// The statistician's choice of which run of a cohort version the drift timeline takes for a score version (the
// newest completed run counts when none is chosen). Stored in drift_run_choices, each change an audit entry.
import type { DriftRunChoice } from '@shared/drift';
import { dataSource } from '../../platform/database/dataSource';
import { CohortVersion } from '../../platform/database/entities/CohortVersion';
import { DriftRunChoice as DriftRunChoiceRow } from '../../platform/database/entities/DriftRunChoice';
import { ValidationRun } from '../../platform/database/entities/ValidationRun';
import type { AuthUser } from '../accounts/actor';
import { forbidden, invalid } from '../errors';
import { appendAudit } from '../accounts/audit';
import { getScoreVersionByNumber } from '../scores/scores';

export async function chooseDriftRun(
  actor: AuthUser,
  scoreId: string,
  versionNumber: number,
  body: DriftRunChoice,
  ip: string,
): Promise<DriftRunChoice> {
  if (actor.role !== 'statistician') throw forbidden('only a statistician chooses the runs of the drift timeline');
  const sv = await getScoreVersionByNumber(scoreId, versionNumber);
  return dataSource.transaction(async (m) => {
    if (body.runId) {
      const run = await m.getRepository(ValidationRun).findOne({
        select: { id: true, status: true },
        where: { id: body.runId, scoreVersionId: sv.id, cohortVersionId: body.cohortVersionId },
      });
      if (!run) throw invalid('that run is not a run of this score version on this cohort version');
      if (run.status !== 'completed')
        throw invalid(`that run is ${run.status}; only a completed run can stand for its cohort version`);
    } else {
      const known = await m.getRepository(CohortVersion).exists({ where: { id: body.cohortVersionId } });
      if (!known) throw invalid('no such cohort version');
    }
    const key = { scoreVersionId: sv.id, cohortVersionId: body.cohortVersionId };
    const before = await m
      .getRepository(DriftRunChoiceRow)
      .findOne({ where: key, lock: { mode: 'pessimistic_write' } });
    await m
      .createQueryBuilder()
      .insert()
      .into(DriftRunChoiceRow)
      .values({ ...key, runId: body.runId, chosenBy: actor.id, chosenAt: () => 'now()' })
      .orUpdate(['run_id', 'chosen_by', 'chosen_at'], ['score_version_id', 'cohort_version_id'])
      .execute();
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'drift.run.chosen',
        targetType: 'score_version',
        targetId: sv.id,
        sourceIp: ip,
        details: { cohortVersionId: body.cohortVersionId, runId: body.runId, previousRunId: before?.runId ?? null },
      },
      m,
    );
    return { cohortVersionId: body.cohortVersionId, runId: body.runId };
  });
}
