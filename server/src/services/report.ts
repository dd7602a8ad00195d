// The validation report of one run: everything a committee file needs, as one JSON bundle the client prints.
import type { ChecklistItem, MethodNote, RunReport } from '@shared/governance';
import type { ScoreModel } from '@shared/model';
import type { RunResults, RunSettings } from '@shared/runs';
import { dataSource } from '../db/dataSource';
import { notFound } from '../middleware/errors';
import { listReviews, listSignatures } from './governance';
import { describeInputs } from './scorecards';

/** Methods and where each is published (see docs/references.md for the full list the engine follows). */
function methods(settings: Partial<RunSettings> | null, results: RunResults | null): MethodNote[] {
  const o = results?.overall;
  return [
    {
      name: 'Discrimination (AUC)',
      how: 'c-statistic with DeLong standard error and 95% CI; ties count one half.',
      source: 'DeLong ER, DeLong DM, Clarke-Pearson DL (1988) Biometrics 44:837–845; Sun X, Xu W (2014) IEEE Signal Processing Letters 21:1389–1393',
    },
    {
      name: 'Calibration-in-the-large and calibration slope',
      how: 'logistic models of the outcome on the linear predictor (as offset for the intercept), fitted by maximum likelihood (IRLS); non-convergence and separation are reported, not estimated.',
      source: 'Cox DR (1958) Biometrika 45:562–565; Van Calster B et al. (2016) J Clin Epidemiol 74:167–176',
    },
    {
      name: 'Observed/expected ratio',
      how: `observed events divided by the sum of predicted risks${o?.oe?.method ? ` (interval: ${o.oe.method})` : ''}.`,
      source: 'common practice, no single source',
    },
    {
      name: 'Calibration curve and ICI, E50, E90, Emax',
      how: `grouped (${settings?.calibrationGroups ?? 10} risk groups with Wilson CIs) and loess-smoothed (span ${settings?.loessSpan ?? 0.75}) observed risk against predicted risk.`,
      source: 'Austin PC, Steyerberg EW (2019) Stat Med 38:4051–4065; Van Calster B et al. (2019) BMC Medicine 17:230',
    },
    {
      name: 'Hosmer–Lemeshow and Spiegelhalter tests',
      how: `${settings?.hosmerLemeshowGroups ?? 10} groups${o?.hosmerLemeshow?.rule ? ` (${o.hosmerLemeshow.rule})` : ''}; reported with their known weaknesses.`,
      source: 'Hosmer DW, Lemeshow S (1980) Commun Stat A9:1043–1069; Spiegelhalter DJ (1986) Stat Med 5:421–433',
    },
    {
      name: 'Overall accuracy',
      how: 'Brier score (with scaled Brier) and cross-entropy (natural log).',
      source: 'common practice, no single source',
    },
    {
      name: 'Clinical usefulness',
      how: 'net benefit across thresholds against treat-all and treat-none; sensitivity, specificity, PPV and NPV at chosen thresholds with Wilson CIs.',
      source: 'Vickers AJ, Elkin EB (2006) Med Decis Making 26:565–574; Newcombe RG (1998) Stat Med 17:857–872',
    },
    {
      name: 'Sample size adequacy',
      how: 'events and non-events against published minimums for external validation.',
      source: 'Collins GS, Ogundimu EO, Altman DG (2016) Stat Med 35:214–226; Riley RD et al. (2021) Stat Med 40:4230–4251',
    },
  ];
}

export const CHECKLIST_SOURCE =
  'Items paraphrased in our own words from the TRIPOD statement for validation studies (Collins GS, Reitsma JB, Altman DG, Moons KGM (2015). BMJ 350:g7594); consult the statement for its exact wording.';

interface ChecklistFacts {
  hasCitation: boolean;
  hasCohortDescription: boolean;
  hasDates: boolean;
  hasOutcome: boolean;
  hasPredictors: boolean;
  hasResults: boolean;
  hasThresholds: boolean;
  hasSubgroups: boolean;
  hasReview: boolean;
  isUpdate: boolean;
}

/** Which TRIPOD validation items this report covers; "absent" means Plumbline does not record it. */
export function tripodChecklist(f: ChecklistFacts): ChecklistItem[] {
  const item = (code: string, topic: string, text: string, present: boolean, where: string): ChecklistItem => ({ code, topic, item: text, present, where });
  return [
    item('1', 'Title', 'Say that this is a validation of a prediction model, for whom, and for which outcome.', true, 'report heading'),
    item('2', 'Abstract', 'Give a short summary of aims, data, methods, results and conclusions.', f.hasResults, 'summary section'),
    item('3a', 'Background', 'Explain the clinical context and cite the model being validated.', f.hasCitation, 'score section (published source)'),
    item('3b', 'Objectives', 'State that the aim is to check an existing model on new data.', true, 'report heading'),
    item('4a', 'Source of data', 'Describe where the data come from (design, registry, file).', true, 'cohort section (source file and SHA-256)'),
    item('4b', 'Source of data', 'Give the start and end dates of the period covered.', f.hasDates, f.hasDates ? 'cohort section (period)' : 'no period recorded for this cohort'),
    item('5a', 'Participants', 'Describe the setting and locations where patients were treated.', f.hasCohortDescription, f.hasCohortDescription ? 'cohort description' : 'no cohort description recorded'),
    item('5b', 'Participants', 'Give the eligibility criteria of the patients included.', f.hasCohortDescription, f.hasCohortDescription ? 'cohort description and intended population' : 'not recorded'),
    item('5c', 'Participants', 'Describe any treatment the patients received, where relevant.', false, 'not recorded by Plumbline'),
    item('6a', 'Outcome', 'Define the outcome, how and when it was assessed.', f.hasOutcome, 'score section (outcome and time horizon)'),
    item('6b', 'Outcome', 'Say whether outcome assessment was blind to the predictors.', false, 'not recorded by Plumbline'),
    item('7a', 'Predictors', 'Define every predictor and how it was measured.', f.hasPredictors, 'score section (inputs)'),
    item('7b', 'Predictors', 'Say whether predictor assessment was blind to the outcome.', false, 'not recorded by Plumbline'),
    item('8', 'Sample size', 'Explain how the sample size was reached and whether it suffices.', f.hasResults, 'results (events, non-events, adequacy warnings)'),
    item('9', 'Missing data', 'Describe how missing or invalid values were handled.', true, 'cohort section (excluded rows)'),
    item('10c', 'Analysis', 'Describe how predictions were computed for the validation data.', f.hasPredictors, 'methods (formula or supplied probability)'),
    item('10d', 'Analysis', 'Name every measure used to judge performance.', true, 'methods section'),
    item('10e', 'Analysis', 'Describe any updating of the model that followed the validation.', f.isUpdate, f.isUpdate ? 'score section (derived version)' : 'no update in this run'),
    item('11', 'Risk groups', 'Give details of any risk thresholds or groups used.', f.hasThresholds, 'threshold table'),
    item('12', 'Development vs validation', 'Compare setting, eligibility, outcome and predictors with the development study.', false, 'not recorded by Plumbline'),
    item('13a', 'Participants', 'Give the flow of patients: numbers included, excluded, with and without the outcome.', f.hasResults, 'cohort section and results'),
    item('13b', 'Participants', 'Describe the patients’ characteristics.', f.hasSubgroups, f.hasSubgroups ? 'subgroup table' : 'no subgroup columns in this run'),
    item('13c', 'Participants', 'Compare the distribution of predictors with the development data.', false, 'not recorded by Plumbline'),
    item('16', 'Model performance', 'Report performance measures with confidence intervals.', f.hasResults, 'results section'),
    item('17', 'Model updating', 'Report the results of any model updating.', f.isUpdate, f.isUpdate ? 'derivation of this version' : 'no update in this run'),
    item('18', 'Limitations', 'Discuss limitations (e.g. small numbers, missing data).', f.hasReview, f.hasReview ? 'review reasoning and warnings' : 'no review yet'),
    item('19a', 'Interpretation', 'Interpret the results against the published performance.', f.hasReview, f.hasReview ? 'review reasoning' : 'no review yet'),
    item('20', 'Implications', 'Discuss possible clinical use and further research.', f.hasReview, f.hasReview ? 'review verdict and committee decision' : 'no review yet'),
    item('21', 'Supplementary', 'Say where more information (data, code, settings) can be found.', f.hasResults, 'run settings, engine version and results SHA-256'),
    item('22', 'Funding', 'Give the source of funding and the funders’ role.', false, 'not recorded by Plumbline'),
  ];
}

export async function runReport(runId: string): Promise<RunReport> {
  const rows: Record<string, unknown>[] = await dataSource.query(
    `SELECT r.id, r.status, r.engine_version, r.settings, r.results, r.results_sha256, r.created_at, r.finished_at,
            sv.version, sv.mode, sv.model, sv.probability_column, sv.clinical_status, sv.derived_from_run_id,
            s.name AS score_name, s.citation, s.outcome_definition, s.time_horizon, s.intended_population,
            coalesce(nullif(cv.label, ''), c.name || ' v' || cv.version) AS cohort_label, c.description AS cohort_description,
            to_char(cv.period_start, 'YYYY-MM-DD') AS period_start, to_char(cv.period_end, 'YYYY-MM-DD') AS period_end,
            cv.row_count, cv.events, cv.excluded_count, cv.source_filename, cv.source_sha256
     FROM validation_runs r
     JOIN score_versions sv ON sv.id = r.score_version_id
     JOIN scores s ON s.id = sv.score_id
     JOIN cohort_versions cv ON cv.id = r.cohort_version_id
     JOIN cohorts c ON c.id = cv.cohort_id
     WHERE r.id = $1`,
    [runId],
  );
  const r = rows[0];
  if (!r) throw notFound('validation run');
  const results = (r.results as RunResults | null) ?? null;
  const settings = (r.settings as RunSettings | null) ?? null;
  const model = (r.model as ScoreModel | null) ?? null;
  const reviews = await listReviews(runId);
  const signatures = await listSignatures(runId);
  const iso = (v: unknown) => (v ? new Date(v as string).toISOString() : null);
  const inputs = describeInputs(r.mode as string, model, r.probability_column as string | null);
  return {
    generatedAt: new Date().toISOString(),
    run: {
      id: runId,
      status: r.status as string,
      engineVersion: (r.engine_version as string | null) ?? null,
      settings,
      resultsSha256: (r.results_sha256 as string | null)?.trim() ?? null,
      createdAt: iso(r.created_at),
      completedAt: iso(r.finished_at),
    },
    score: {
      name: r.score_name as string,
      version: r.version as number,
      mode: r.mode as string,
      citation: r.citation as string,
      predicts: r.outcome_definition as string,
      horizon: r.time_horizon as string,
      forWhom: r.intended_population as string,
      inputs,
      intercept: model?.intercept ?? null,
      clinicalStatus: r.clinical_status as string,
    },
    cohort: {
      label: r.cohort_label as string,
      description: (r.cohort_description as string) ?? '',
      periodStart: r.period_start as string | null,
      periodEnd: r.period_end as string | null,
      patients: r.row_count as number,
      events: r.events as number,
      excluded: r.excluded_count as number,
      sourceFilename: r.source_filename as string,
      sourceSha256: (r.source_sha256 as string).trim(),
    },
    results,
    methods: methods(settings, results),
    reviews,
    signatures,
    checklist: tripodChecklist({
      hasCitation: !!r.citation,
      hasCohortDescription: !!(r.cohort_description as string)?.trim(),
      hasDates: !!(r.period_start && r.period_end),
      hasOutcome: !!r.outcome_definition,
      hasPredictors: inputs.length > 0,
      hasResults: !!results,
      hasThresholds: !!results?.overall?.thresholds?.length,
      hasSubgroups: !!results?.subgroups?.length,
      hasReview: reviews.some((v) => v.current),
      isUpdate: !!r.derived_from_run_id,
    }),
    checklistSource: CHECKLIST_SOURCE,
  };
}
