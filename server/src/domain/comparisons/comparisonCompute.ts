// The computation of one score comparison, pure (no database): two score versions' predicted risks on the same
// patients, the paired AUC test and net-benefit differences (stats/compareScores.ts), and each score's own figures
// and calibration curve. The worker thread and the tests call this one function.
import type { ComparedScoreFigures, ScoreComparisonResults, ScoreComparisonSettings } from '@shared/scoreComparison';
import type { Estimate, FitResult, ValidationResult } from '@shared/validation';
import { compareScores } from '../../stats/compareScores';
import { ENGINE_VERSION, validate } from '../../stats/index';
import { canonical } from '../accounts/audit';
import type { CohortData } from '../cohorts/cohortData';
import { asStored, predictedRisk, RunInputError, sha256, type RunScoreInput } from '../runs/runCompute';

export interface ComparisonComputeInput {
  first: RunScoreInput;
  second: RunScoreInput;
  data: CohortData;
  settings: ScoreComparisonSettings;
}

/** What a comparison depends on: both formulas (in order), the cohort by its source hash and size, the settings, the engine. */
export function comparisonInputsSha256(
  first: RunScoreInput,
  second: RunScoreInput,
  cohort: { sourceSha256: string; rowCount: number },
  settings: ScoreComparisonSettings,
): string {
  const score = (s: RunScoreInput) => ({ mode: s.mode, model: s.model, probabilityColumn: s.probabilityColumn });
  return sha256(
    canonical(
      asStored({ engineVersion: ENGINE_VERSION, first: score(first), second: score(second), cohort, settings }),
    ),
  );
}

export const comparisonResultsSha256 = (results: ScoreComparisonResults) => sha256(canonical(asStored(results)));

const fitted = (f: FitResult<Estimate>, what: string, warnings: string[]): Estimate | null => {
  if (f.converged) return { estimate: f.estimate, lower: f.lower, upper: f.upper };
  warnings.push(`${what}: ${f.reason} (${f.detail})`);
  return null;
};
const finite = (x: number) => (Number.isFinite(x) ? x : null);

function figuresOf(r: ValidationResult): ComparedScoreFigures {
  // A comparison shows no threshold table, so the table's own remarks (an undefined NPV at 5%, say) are left out.
  const warnings = r.warnings.filter((w) => !/^At threshold /.test(w));
  return {
    auc: { estimate: r.auc.estimate, lower: r.auc.lower, upper: r.auc.upper },
    calibrationIntercept: fitted(r.calibrationIntercept, 'calibration-in-the-large', warnings),
    calibrationSlope: fitted(r.calibrationSlope, 'calibration slope', warnings),
    oe: Number.isFinite(r.oe.estimate) ? { estimate: r.oe.estimate, lower: r.oe.lower, upper: r.oe.upper } : null,
    brier: finite(r.brier),
    ici: finite(r.ici),
    calibrationCurve: r.calibrationCurve,
    warnings,
  };
}

/** Share of the work done (0..1): both scores' own figures first, then the paired bootstrap. */
export type ComparisonProgress = (fraction: number) => void;

export function computeComparison(
  input: ComparisonComputeInput,
  onProgress: ComparisonProgress = () => {},
): ScoreComparisonResults {
  const { data, settings } = input;
  const p1 = predictedRisk(input.first, data);
  const p2 = predictedRisk(input.second, data);
  const y = data.outcome;
  const own = (p: Float64Array) =>
    validate(p, y, {
      netBenefitThresholds: settings.netBenefitThresholds,
      loessSpan: settings.loessSpan,
      calibrationGroups: settings.calibrationGroups,
      bootstrapReplicates: 0,
      bootstrapSeed: settings.bootstrapSeed,
    });
  let a: ValidationResult;
  let b: ValidationResult;
  try {
    a = own(p1);
    b = own(p2);
  } catch (err) {
    throw new RunInputError((err as Error).message);
  }
  onProgress(0.3);
  const paired = compareScores(p1, p2, y, {
    thresholds: settings.netBenefitThresholds,
    replicates: settings.bootstrapReplicates,
    seed: settings.bootstrapSeed,
    onReplicate: (done, total) => onProgress(0.3 + (0.65 * done) / total),
  });
  // Stored as JSON: an interval the bootstrap did not compute is null, never NaN.
  return asStored({
    engineVersion: ENGINE_VERSION,
    n: paired.n,
    events: paired.events,
    auc: paired.auc,
    netBenefit: paired.netBenefit,
    treatAll: a.netBenefit.map((r) => r.treatAll),
    bootstrap: paired.bootstrap,
    first: figuresOf(a),
    second: figuresOf(b),
  }) as ScoreComparisonResults;
}
