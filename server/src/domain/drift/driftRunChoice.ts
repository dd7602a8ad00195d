// The statistician's choice of which run of a cohort version the drift timeline takes for a score version (the
// newest completed run counts when none is chosen). Stored in drift_run_choices, each change an audit entry.
import type { DriftRunChoice } from '@shared/drift';
import { dataSource } from '../../platform/database/dataSource';
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
      const runs: { status: string }[] = await m.query(
        'SELECT status FROM validation_runs WHERE id = $1 AND score_version_id = $2 AND cohort_version_id = $3',
        [body.runId, sv.id, body.cohortVersionId],
      );
      if (!runs[0]) throw invalid('that run is not a run of this score version on this cohort version');
      if (runs[0].status !== 'completed')
        throw invalid(`that run is ${runs[0].status}; only a completed run can stand for its cohort version`);
    } else {
      const cvs: unknown[] = await m.query('SELECT 1 FROM cohort_versions WHERE id = $1', [body.cohortVersionId]);
      if (!cvs.length) throw invalid('no such cohort version');
    }
    const [before]: { run_id: string | null }[] = await m.query(
      'SELECT run_id FROM drift_run_choices WHERE score_version_id = $1 AND cohort_version_id = $2 FOR UPDATE',
      [sv.id, body.cohortVersionId],
    );
    await m.query(
      `INSERT INTO drift_run_choices (score_version_id, cohort_version_id, run_id, chosen_by) VALUES ($1, $2, $3, $4)
       ON CONFLICT (score_version_id, cohort_version_id) DO UPDATE SET run_id = EXCLUDED.run_id, chosen_by = EXCLUDED.chosen_by, chosen_at = now()`,
      [sv.id, body.cohortVersionId, body.runId, actor.id],
    );
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'drift.run.chosen',
        targetType: 'score_version',
        targetId: sv.id,
        sourceIp: ip,
        details: { cohortVersionId: body.cohortVersionId, runId: body.runId, previousRunId: before?.run_id ?? null },
      },
      m,
    );
    return { cohortVersionId: body.cohortVersionId, runId: body.runId };
  });
}
