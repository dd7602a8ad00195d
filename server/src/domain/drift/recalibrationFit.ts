// The recalibration fit of a run's cohort (intercept update, logistic recalibration or the closed test) and the
// before/after calibration it shows. Pure: it runs in a pool thread (jobs/threads/recalibrationWorker.ts), never on the API
// thread, for the preview and for the proposal alike (domain/drift/recalibration.ts).
import type { CalibrationPoint, CalibrationSummary, Derivation, RecalibrationMethod } from '@shared/drift';
import type { Estimate, FitResult } from '@shared/validation';
import { calibrationIntercept } from '../../stats/calibrationIntercept';
import { calibrationSlope } from '../../stats/calibrationSlope';
import { closedTest } from '../../stats/closedTest';
import { groupedCalibration } from '../../stats/groupedCalibration';
import { observedExpected } from '../../stats/observedExpected';
import {
  interceptUpdate,
  logisticRecalibration,
  recalibratedProbabilities,
  type UpdateFit,
} from '../../stats/recalibration';
import { sortCohort } from '../../stats/sortedCohort';

/** A fit that cannot be made (separation, no convergence): answered as a conflict, with this message. */
export class RecalibrationRefused extends Error {}

/** How many fits this thread has made itself: the API thread's stays at 0 (the fits are made in the pool). */
let madeHere = 0;
export const fitsMadeHere = () => madeHere;

export const convergedEstimate = (f: FitResult<Estimate> | null): Estimate | null =>
  f && f.converged && Number.isFinite(f.estimate) ? { estimate: f.estimate, lower: f.lower, upper: f.upper } : null;
export const finiteEstimate = (e: Estimate | null | undefined): Estimate | null =>
  e && Number.isFinite(e.estimate) ? { estimate: e.estimate, lower: e.lower, upper: e.upper } : null;

function summary(lp: Float64Array, p: Float64Array, y: Uint8Array): CalibrationSummary {
  return {
    citl: convergedEstimate(calibrationIntercept(lp, y)),
    slope: convergedEstimate(calibrationSlope(lp, y)),
    oe: finiteEstimate(observedExpected(p, y)),
  };
}

function curve(p: Float64Array, y: Uint8Array): CalibrationPoint[] {
  return groupedCalibration(sortCohort(p, y), 10).map((g) => ({
    meanPredicted: g.meanPredicted,
    observed: g.observed.estimate,
  }));
}

const estOf = (e: { estimate: number; lower: number; upper: number }): Estimate => ({
  estimate: e.estimate,
  lower: e.lower,
  upper: e.upper,
});

export function derive(
  method: RecalibrationMethod,
  lp: Float64Array,
  y: Uint8Array,
): { derivation: Derivation; fit: UpdateFit | null } {
  madeHere++;
  let fit: UpdateFit | null;
  let chosen: Derivation['chosen'];
  let lrTests: Derivation['lrTests'] = [];
  if (method === 'closed-test') {
    const ct = closedTest(lp, y);
    if (!ct.converged) throw new RecalibrationRefused(`the recalibration fit failed: ${ct.reason} (${ct.detail})`);
    chosen = ct.choice;
    fit = ct.choice === 'intercept' ? ct.intercept : ct.choice === 'logistic' ? ct.logistic : null;
    lrTests = ct.tests.map((t) => ({ comparison: t.comparison, statistic: t.statistic, df: t.df, pValue: t.pValue }));
  } else {
    const f = method === 'intercept' ? interceptUpdate(lp, y) : logisticRecalibration(lp, y);
    if (!f.converged) throw new RecalibrationRefused(`the recalibration fit failed: ${f.reason} (${f.detail})`);
    fit = f;
    chosen = method;
  }
  const a = fit ? fit.a.estimate : 0;
  const b = fit ? fit.b.estimate : 1;
  const before = recalibratedProbabilities(lp, 0, 1);
  const after = recalibratedProbabilities(lp, a, b);
  const lpAfter = new Float64Array(lp.length);
  for (let i = 0; i < lp.length; i++) lpAfter[i] = a + b * lp[i];
  return {
    fit,
    derivation: {
      method,
      chosen,
      intercept: fit ? estOf(fit.a) : { estimate: 0, lower: 0, upper: 0 },
      slope: fit && fit.method === 'logistic' ? estOf(fit.b) : null,
      lrTests,
      before: summary(lp, before, y),
      after: summary(lpAfter, after, y),
      calibrationBefore: curve(before, y),
      calibrationAfter: curve(after, y),
    },
  };
}
