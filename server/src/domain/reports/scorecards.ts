// Score cards: what clinicians see, and only for versions the committee approved. Summary numbers only —
// never cohort rows, never patient-level data.
import type { ScoreCardView, IntervalView } from '@shared/governance';
import { formatCount, formatEstimate } from '@shared/format';
import type { ScoreModel } from '@shared/model';
import type { ValidationResult } from '@shared/validation';
import { dataSource } from '../../platform/database/dataSource';
import { notFound } from '../errors';
import { COHORT_LABEL_SQL } from '../runs/runJoin';

const interval = (e: { estimate: number; lower: number; upper: number } | null | undefined): IntervalView | null =>
  e && Number.isFinite(e.estimate) ? { estimate: e.estimate, lower: e.lower, upper: e.upper } : null;

/** How one predictor enters the formula, in words a clinician reads. */
export function describeInputs(
  mode: string,
  model: ScoreModel | null,
  probabilityColumn: string | null,
): { name: string; how: string }[] {
  if (mode === 'supplied' || !model) {
    return [
      {
        name: probabilityColumn ?? 'predicted probability',
        how: 'a predicted risk supplied by the score’s vendor (the formula is not published)',
      },
    ];
  }
  const seen = new Map<string, string>();
  for (const p of model.predictors) {
    const how =
      p.transform === 'log'
        ? 'natural logarithm of the value'
        : p.transform === 'indicator'
          ? `counts when the value is “${p.level}”`
          : p.transform === 'rcs'
            ? 'a smooth (spline) function of the value'
            : 'the value as recorded';
    if (!seen.has(p.column)) seen.set(p.column, how);
  }
  return [...seen].map(([name, how]) => ({ name: name.replace(/_/g, ' '), how }));
}

/** The figures of a run that a score card shows (a subset of its results.overall). */
export type CardFigures = Pick<
  ValidationResult,
  'n' | 'events' | 'auc' | 'oe' | 'calibrationIntercept' | 'calibrationSlope'
>;

/** The run's key numbers, one plain sentence each; wording follows the direction of each measure. */
export function plainWords(
  o: CardFigures,
  cohort: { patients: number; events: number; periodStart: string | null; periodEnd: string | null },
): string[] {
  const out: string[] = [];
  const when =
    cohort.periodStart && cohort.periodEnd ? ` discharged between ${cohort.periodStart} and ${cohort.periodEnd}` : '';
  out.push(
    `Checked on ${formatCount(cohort.patients)} local patients${when}, of whom ${formatCount(cohort.events)} had the outcome.`,
  );
  const auc = interval(o.auc);
  if (auc) {
    out.push(
      `Ranking (AUC ${formatEstimate('auc', auc)}): in a random pair of one patient with the outcome and one without, the score gave the higher risk to the patient with the outcome about ${Math.round(auc.estimate * 100)} times in 100 (0.5 is a coin toss, 1 is perfect).`,
    );
  }
  const oe = interval(o.oe);
  if (oe) {
    const dir =
      oe.lower > 1
        ? 'more outcomes happened than the score predicted'
        : oe.upper < 1
          ? 'fewer outcomes happened than the score predicted'
          : 'observed and predicted numbers of outcomes were compatible';
    out.push(`Overall level (observed/expected ${formatEstimate('oe', oe)}): ${dir}.`);
  }
  const citl = o.calibrationIntercept.converged ? interval(o.calibrationIntercept) : null;
  if (citl) {
    const dir =
      citl.lower > 0
        ? 'the score tended to under-estimate risk'
        : citl.upper < 0
          ? 'the score tended to over-estimate risk'
          : 'no clear over- or under-estimation on average';
    out.push(`Calibration-in-the-large ${formatEstimate('calibrationIntercept', citl)} (0 is ideal): ${dir}.`);
  } else out.push('Calibration-in-the-large could not be estimated on this cohort.');
  const slope = o.calibrationSlope.converged ? interval(o.calibrationSlope) : null;
  if (slope) {
    const dir =
      slope.upper < 1
        ? 'predicted risks were too extreme (high risks too high, low risks too low)'
        : slope.lower > 1
          ? 'predicted risks were too modest (spread too narrow)'
          : 'the spread of predicted risks looked about right';
    out.push(`Calibration slope ${formatEstimate('calibrationSlope', slope)} (1 is ideal): ${dir}.`);
  } else out.push('The calibration slope could not be estimated on this cohort.');
  return out;
}

interface CardRow {
  score_version_id: string;
  version: number;
  mode: string;
  model: ScoreModel | null;
  probability_column: string | null;
  approved_run_id: string | null;
  score_name: string;
  outcome_definition: string;
  time_horizon: string;
  intended_population: string;
  citation: string;
  caution_text: string;
  /** Only the parts of the approved run's results.overall that a card shows. */
  overall: CardFigures | null;
  cohort_label: string | null;
  period_start: string | null;
  period_end: string | null;
  row_count: number | null;
  events: number | null;
  printed_name: string | null;
  signer_role: string | null;
  signed_at: Date | null;
}

const CARD_SQL = `
  SELECT sv.id AS score_version_id, sv.version, sv.mode, sv.model, sv.probability_column, sv.approved_run_id,
         s.name AS score_name, s.outcome_definition, s.time_horizon, s.intended_population, s.citation, s.caution_text,
         CASE WHEN r.id IS NOT NULL THEN jsonb_build_object('n', ov.o->'n', 'events', ov.o->'events', 'auc', ov.o->'auc', 'oe', ov.o->'oe',
           'calibrationIntercept', ov.o->'calibrationIntercept', 'calibrationSlope', ov.o->'calibrationSlope') END AS overall,
         ${COHORT_LABEL_SQL} AS cohort_label,
         to_char(cv.period_start, 'YYYY-MM-DD') AS period_start, to_char(cv.period_end, 'YYYY-MM-DD') AS period_end,
         cv.row_count, cv.events,
         sg.printed_name, sg.role AS signer_role, sg.signed_at
  FROM score_versions sv
  JOIN scores s ON s.id = sv.score_id
  LEFT JOIN validation_runs r ON r.id = sv.approved_run_id
  -- The whole results jsonb is large and TOASTed; 'overall' is de-compressed once (OFFSET 0 keeps the planner from
  -- expanding it into one de-compression per field) and only the card's figures leave the database.
  LEFT JOIN LATERAL (SELECT r.results->'overall' AS o OFFSET 0) ov ON true
  LEFT JOIN cohort_versions cv ON cv.id = r.cohort_version_id
  LEFT JOIN cohorts c ON c.id = cv.cohort_id
  LEFT JOIN LATERAL (
    SELECT printed_name, role, signed_at FROM signatures
    WHERE run_id = sv.approved_run_id AND meaning = 'approve for clinical use' ORDER BY signed_at DESC LIMIT 1
  ) sg ON true
  WHERE sv.clinical_status = 'approved'`;

function toCard(r: CardRow): ScoreCardView {
  const overall = r.overall && typeof r.overall.n === 'number' ? r.overall : null;
  const cohort = {
    patients: r.row_count ?? overall?.n ?? 0,
    events: r.events ?? overall?.events ?? 0,
    periodStart: r.period_start,
    periodEnd: r.period_end,
  };
  return {
    scoreVersionId: r.score_version_id,
    scoreName: r.score_name,
    version: r.version,
    predicts: r.outcome_definition,
    horizon: r.time_horizon,
    forWhom: r.intended_population,
    citation: r.citation,
    inputs: describeInputs(r.mode, r.model, r.probability_column),
    caution: r.caution_text,
    validation:
      overall && r.approved_run_id
        ? {
            runId: r.approved_run_id,
            cohortLabel: r.cohort_label ?? '',
            periodStart: r.period_start,
            periodEnd: r.period_end,
            // The run's own counts are what the figures describe (the cohort may hold rows the run excluded).
            patients: overall.n,
            events: overall.events,
            auc: interval(overall.auc),
            calibrationIntercept: overall.calibrationIntercept.converged
              ? interval(overall.calibrationIntercept)
              : null,
            calibrationSlope: overall.calibrationSlope.converged ? interval(overall.calibrationSlope) : null,
            oe: interval(overall.oe),
            plainWords: plainWords(overall, { ...cohort, patients: overall.n, events: overall.events }),
          }
        : null,
    approval:
      r.printed_name && r.signed_at
        ? { printedName: r.printed_name, role: r.signer_role ?? 'chair', signedAt: new Date(r.signed_at).toISOString() }
        : null,
  };
}

export async function listScoreCards(): Promise<ScoreCardView[]> {
  const rows: CardRow[] = await dataSource.query(`${CARD_SQL} ORDER BY s.name, sv.version DESC`);
  return rows.map(toCard);
}

/** One card; a version that is not (or no longer) approved has no card. */
export async function getScoreCard(versionId: string): Promise<ScoreCardView> {
  const rows: CardRow[] = await dataSource.query(`${CARD_SQL} AND sv.id = $1`, [versionId]);
  if (!rows[0]) throw notFound('score card (approved score version)');
  return toCard(rows[0]);
}
