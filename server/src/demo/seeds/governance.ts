// Demo governance record on the demo runs (seeded by the runs team before this): an older run reviewed and
// approved by the chair, so clinicians see a score card, and the newest quarter's run reviewed and waiting for
// sign-off — with the e-mail notifications those acts produce. Invented scenario; idempotent.
import { formatCount, formatEstimateShort, formatFigure } from '@shared/format';
import type { RunResults } from '@shared/runs';
import { DEMO_PASSWORD } from '../../platform/config';
import type { AuthUser } from '../../domain/accounts/actor';
import { reviewRun, signoffRun } from '../../domain/governance/governance';
import { dataSource } from '../../platform/database/dataSource';
import { seedAccounts } from './accounts';
import { logger } from '../../platform/observability/log';
import { RUN_SCORE_COHORT_JOIN } from '../../domain/runs/runJoin';

const SEED_IP = 'seed';

interface DemoRun {
  id: string;
  results: RunResults;
  label: string;
  period_end: string | null;
  reviews: number;
  decided: number;
}

/** An invented but consistent reasoning text, written from the run's own figures. */
function reasoning(r: RunResults, label: string, fit: boolean): string {
  const o = r.overall;
  const slope = o.calibrationSlope.converged
    ? `calibration slope ${formatEstimateShort('calibrationSlope', o.calibrationSlope)}`
    : 'calibration slope not estimable';
  const citl = o.calibrationIntercept.converged
    ? `calibration-in-the-large ${formatFigure('calibrationIntercept', o.calibrationIntercept.estimate)}`
    : 'calibration-in-the-large not estimable';
  return [
    `${label}: ${formatCount(o.n)} discharges, ${formatCount(o.events)} readmissions.`,
    `AUC ${formatEstimateShort('auc', o.auc)}; ${citl}; ${slope}; O/E ${formatEstimateShort('oe', o.oe)}.`,
    fit
      ? 'Discrimination is in line with the published figure and calibration is acceptable for ward-level risk flags. No subgroup flagged as too small departs visibly from the overall picture.'
      : 'Discrimination holds, but O/E has crept upwards over the year, consistent with the gently rising baseline risk we see on the drift chart; the committee should weigh this before renewing approval.',
  ].join('\n');
}

const asActor = (u: { id: string; email: string; name: string; role: AuthUser['role'] }): AuthUser => ({
  id: u.id,
  email: u.email,
  name: u.name,
  role: u.role,
});

export async function seedGovernance(): Promise<void> {
  const runs: DemoRun[] = await dataSource.query(
    `SELECT r.id, r.results, coalesce(nullif(cv.label, ''), c.name) AS label, to_char(cv.period_end, 'YYYY-MM-DD') AS period_end,
            (SELECT count(*)::int FROM run_reviews rv WHERE rv.run_id = r.id) AS reviews,
            (SELECT count(*)::int FROM signatures sg WHERE sg.run_id = r.id) AS decided
     FROM ${RUN_SCORE_COHORT_JOIN}
     WHERE r.status = 'completed' AND s.name ILIKE 'Kestrel%'
     ORDER BY cv.period_end ASC NULLS FIRST, r.created_at ASC`,
  );
  if (runs.length < 2) {
    logger.info('[seed] governance: fewer than two completed demo runs; nothing to review yet');
    return;
  }
  const accounts = await seedAccounts();
  const statistician = asActor(accounts.statistician);
  const chair = asActor(accounts.chair);
  const newest = runs[runs.length - 1];
  const older = runs[runs.length - 2];

  if (older.reviews === 0) {
    await reviewRun(
      statistician,
      older.id,
      { verdict: 'fit for use', reasoning: reasoning(older.results, older.label, true) },
      SEED_IP,
    );
  }
  if (older.decided === 0) {
    await signoffRun(chair, older.id, { decision: 'approve', password: DEMO_PASSWORD }, SEED_IP);
  }
  if (newest.reviews === 0) {
    await reviewRun(
      statistician,
      newest.id,
      { verdict: 'recalibrate first', reasoning: reasoning(newest.results, newest.label, false) },
      SEED_IP,
    );
  }
}
