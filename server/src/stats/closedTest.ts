/**
 * Closed testing procedure to choose between keeping the score, an intercept update and a logistic recalibration.
 *   Step 1: LR = 2(ℓ_recal − ℓ_original) ~ χ²(2). Not significant at α → keep the original score.
 *   Step 2: LR = 2(ℓ_recal − ℓ_intercept) ~ χ²(1). Significant → logistic recalibration; otherwise intercept update.
 * Source: Vergouwe Y, Nieboer D, Oostenbrink R, et al. (2017). A closed testing procedure to select an appropriate
 * method for updating prediction models. Stat Med 36:4529–4539.
 * Choices: α = 0.05; the paper's first step tests full model revision against the original. Plumbline offers no
 * revision (re-estimating each coefficient), so the sequence starts at recalibration — its closed sub-family of
 * original ⊂ intercept update ⊂ recalibration. Because the tests are nested and each is run only when the larger one
 * rejects, the family-wise error stays at α.
 */
import type { FitResult } from '@shared/validation';
import { chiSquareUpper } from './distributions';
import { interceptUpdate, logisticRecalibration, originalLogLik, type UpdateFit } from './recalibration';

export interface LrTest {
  comparison: string;
  statistic: number;
  df: number;
  pValue: number;
  significant: boolean;
}

export interface ClosedTestResult {
  alpha: number;
  logLik: { original: number; intercept: number; logistic: number };
  tests: LrTest[];
  choice: 'original' | 'intercept' | 'logistic';
  intercept: UpdateFit;
  logistic: UpdateFit;
}

export function closedTest(lp: Float64Array, y: Uint8Array, alpha = 0.05): FitResult<ClosedTestResult> {
  const intercept = interceptUpdate(lp, y);
  if (!intercept.converged) return intercept;
  const logistic = logisticRecalibration(lp, y);
  if (!logistic.converged) return logistic;
  const l0 = originalLogLik(lp, y);
  const lr = (comparison: string, big: number, small: number, df: number): LrTest => {
    const statistic = Math.max(0, 2 * (big - small));
    const pValue = chiSquareUpper(statistic, df);
    return { comparison, statistic, df, pValue, significant: pValue < alpha };
  };
  const tests = [lr('logistic recalibration vs original score', logistic.logLik, l0, 2)];
  let choice: ClosedTestResult['choice'] = 'original';
  if (tests[0].significant) {
    tests.push(lr('logistic recalibration vs intercept update', logistic.logLik, intercept.logLik, 1));
    choice = tests[1].significant ? 'logistic' : 'intercept';
  }
  return {
    converged: true,
    alpha,
    logLik: { original: l0, intercept: intercept.logLik, logistic: logistic.logLik },
    tests,
    choice,
    intercept,
    logistic,
  };
}
