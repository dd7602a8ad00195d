/**
 * The full metric set on one cohort, without bootstrap: every metric file in this folder, fed from one shared sort
 * (sortedCohort.ts) and one clamped logit (checkInputs.ts). Pure; throws EngineInputError on input it refuses.
 */
import type { ValidationResult, ValidationSettings } from '@shared/validation';
import { brier } from './brier';
import { calibrationIntercept } from './calibrationIntercept';
import { calibrationSlope } from './calibrationSlope';
import { checkInputs, clampedLogit, EngineInputError, P_CLAMP } from './checkInputs';
import { delongAuc } from './delongAuc';
import { groupedCalibration } from './groupedCalibration';
import { hosmerLemeshow } from './hosmerLemeshow';
import { ici } from './ici';
import { loessCurve } from './loess';
import { logLoss } from './logLoss';
import { netBenefit } from './netBenefit';
import { observedExpected } from './observedExpected';
import { riskHistogram } from './riskHistogram';
import { rocCurve } from './rocCurve';
import { sortCohort } from './sortedCohort';
import { spiegelhalter } from './spiegelhalter';
import { thresholdTable } from './thresholdTable';

// 1.1.0: standardised net benefit in every net-benefit row and its bootstrap interval.
// 1.2.0: each subgroup and site level carries its smoothed calibration curve (groupPerformance.ts); with no more
// distinct risks than groups, Hosmer–Lemeshow and the grouped curve make one group per distinct risk (riskGroups.ts);
// Hosmer–Lemeshow is referred to χ² on G df (external validation), no longer G − 2 (hosmerLemeshow.ts).
// 1.2.0 also: runs on cohorts with gaps carry missingData (complete cases beside pooled multiple imputation).
export const ENGINE_VERSION = '1.2.0';

export const defaultValidationSettings: ValidationSettings = {
  thresholds: [0.05, 0.1, 0.2, 0.3, 0.5],
  loessSpan: 0.75,
  hosmerLemeshowGroups: 10,
  calibrationGroups: 10,
  bootstrapReplicates: 0,
  bootstrapSeed: 20260101,
  hosmerLemeshowRule: 'quantile-type2',
  loessExactMaxN: 5000,
  loessGridSize: 100,
};

export function resolveSettings(settings: Partial<ValidationSettings> = {}): ValidationSettings {
  const s = { ...defaultValidationSettings, ...settings };
  for (const t of [...s.thresholds, ...(s.netBenefitThresholds ?? [])]) {
    if (!(t > 0 && t < 1)) throw new EngineInputError(`threshold ${t} must lie strictly between 0 and 1`, null, null);
  }
  if (!(s.loessSpan > 0)) throw new EngineInputError(`loess span ${s.loessSpan} must be positive`, null, null);
  if (!(Number.isInteger(s.hosmerLemeshowGroups) && s.hosmerLemeshowGroups >= 2))
    throw new EngineInputError('Hosmer–Lemeshow needs at least 2 groups', null, null);
  return s;
}

export function computeFullSet(p: Float64Array, y: Uint8Array, settings: ValidationSettings): ValidationResult {
  const check = checkInputs(p, y);
  if (!check.ok) throw new EngineInputError(check.message, check.row, check.field);
  const warnings: string[] = [];
  const extreme = check.zeros + check.ones;
  const handling =
    extreme === 0
      ? 'none at exactly 0 or 1'
      : `${check.zeros} at exactly 0 and ${check.ones} at exactly 1: log loss, calibration intercept and slope use p clamped to [${P_CLAMP}, 1 − ${P_CLAMP}]; every other metric uses p as given`;
  if (extreme > 0)
    warnings.push(`Predicted risks of exactly 0 (${check.zeros}) or 1 (${check.ones}): ${handling.split(': ')[1]}.`);

  const sorted = sortCohort(p, y);
  const lp = clampedLogit(p);
  const auc = delongAuc(sorted);
  if (Number.isNaN(auc.se))
    warnings.push(
      'The DeLong standard error needs at least two events and two non-events: the AUC interval is not estimable.',
    );
  else if (auc.lower < 0 || auc.upper > 1)
    warnings.push('The AUC interval crosses [0, 1]; it is reported untruncated.');
  const ll = logLoss(p, y);
  const br = brier(p, y);
  const intercept = calibrationIntercept(lp, y);
  const slope = calibrationSlope(lp, y);
  if (!intercept.converged)
    warnings.push(`Calibration intercept not estimable (${intercept.reason}): ${intercept.detail}.`);
  if (!slope.converged) warnings.push(`Calibration slope not estimable (${slope.reason}): ${slope.detail}.`);
  const oe = observedExpected(p, y);
  const rule = settings.hosmerLemeshowRule ?? 'quantile-type2';
  const hl = hosmerLemeshow(sorted, settings.hosmerLemeshowGroups, rule);
  if (hl.groups < 2) warnings.push(`Hosmer–Lemeshow: only ${hl.groups} distinct risk group, so no p-value.`);
  const sp = spiegelhalter(p, y);
  if (Number.isNaN(sp.z)) warnings.push('Spiegelhalter z is not defined: every predicted risk is 0, ½ or 1.');
  const curve = loessCurve(sorted, {
    span: settings.loessSpan,
    exactMaxN: settings.loessExactMaxN,
    gridSize: settings.loessGridSize,
  });
  const calib = ici(sorted, curve.atGroups);
  const thresholds = thresholdTable(sorted, settings.thresholds);
  for (const row of thresholds) {
    if (row.tp + row.fp === 0)
      warnings.push(`At threshold ${row.threshold} no row is at or above it: PPV is not defined.`);
    if (row.tn + row.fn === 0)
      warnings.push(`At threshold ${row.threshold} every row is at or above it: NPV is not defined.`);
  }
  const nbThresholds = settings.netBenefitThresholds ?? settings.thresholds;
  const { estimate, se, lower, upper } = auc;
  return {
    engineVersion: ENGINE_VERSION,
    n: sorted.n,
    events: sorted.events,
    nonEvents: sorted.nonEvents,
    eventRate: sorted.events / sorted.n,
    extremeProbabilities: { zeros: check.zeros, ones: check.ones, handling },
    auc: { estimate, se, lower, upper },
    rocCurve: rocCurve(sorted),
    logLoss: ll.mean,
    logLossTotal: ll.total,
    brier: br.brier,
    scaledBrier: br.scaled,
    calibrationIntercept: intercept,
    calibrationSlope: slope,
    oe: {
      estimate: oe.estimate,
      lower: oe.lower,
      upper: oe.upper,
      observed: oe.observed,
      expected: oe.expected,
      method: oe.method,
    },
    hosmerLemeshow: hl,
    spiegelhalter: sp,
    calibrationCurve: {
      grouped: groupedCalibration(sorted, settings.calibrationGroups, rule),
      smoothed: curve.plot,
      span: settings.loessSpan,
      evaluation: `loess (tricube, local quadratic, span ${settings.loessSpan}, no robustness iterations): ${curve.evaluation}`,
    },
    ici: calib.ici,
    e50: calib.e50,
    e90: calib.e90,
    emax: calib.emax,
    netBenefit: netBenefit(sorted, nbThresholds),
    thresholds,
    riskHistogram: riskHistogram(sorted),
    warnings,
  };
}
