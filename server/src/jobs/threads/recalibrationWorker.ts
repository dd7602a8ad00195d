// Pool task for a recalibration (domain/drift/recalibration.ts): loads the run's cohort through this thread's own connection,
// computes each patient's linear predictor and makes the fit (domain/drift/recalibrationFit.ts) off the API thread.
import type { Derivation, RecalibrationMethod } from '@shared/drift';
import pg from 'pg';
import { config } from '../../platform/config';
import type { UpdateFit } from '../../stats/recalibration';
import { loadCohortData } from '../../domain/cohorts/cohortData';
import { derive, RecalibrationRefused } from '../../domain/drift/recalibrationFit';
import { predictedRisk, type RunScoreInput } from '../../domain/runs/runCompute';
import { completeCaseData } from '../../domain/runs/runMissingData';

export interface RecalibrationTask {
  cohortVersionId: string;
  score: RunScoreInput;
  method: RecalibrationMethod;
}

export type RecalibrationAnswer =
  { ok: true; derivation: Derivation; fit: UpdateFit | null } | { ok: false; message: string };

/** The pool task: the fit, or why it cannot be made (a conflict for the caller). */
export async function recalibration(task: RecalibrationTask): Promise<RecalibrationAnswer> {
  const client = new pg.Client({ ...config.db, application_name: 'plumbline recalibration' });
  client.on('error', () => undefined); // a lost connection surfaces as the failed query
  await client.connect();
  try {
    const all = await loadCohortData(
      task.cohortVersionId,
      async (sql, params) => (await client.query(sql, params as unknown[])).rows,
    );
    // Fitted on the complete cases, as the run's figures are.
    const data = completeCaseData(task.score, all);
    const p = predictedRisk(task.score, data);
    const lp = new Float64Array(p.length);
    for (let i = 0; i < p.length; i++) lp[i] = Math.log(p[i] / (1 - p[i]));
    return { ok: true, ...derive(task.method, lp, data.outcome) };
  } catch (err) {
    if (err instanceof RecalibrationRefused) return { ok: false, message: err.message };
    throw err;
  } finally {
    await client.end().catch(() => undefined);
  }
}
