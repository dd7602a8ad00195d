// The validation report of one run: everything a committee file needs, as one JSON bundle the client prints.
import type { MethodNote, RunReport } from '@shared/governance';
import { formatCount, formatThresholdList } from '@shared/format';
import { CHECKLIST_SOURCE, reportChecklist, type ReportBundle } from '@shared/report';
import type { ScoreModel } from '@shared/model';
import type { RunResults, RunSettings } from '@shared/runs';
import { dataSource } from '../../platform/database/dataSource';
import { notFound } from '../errors';
import { listReviews, listSignatures } from '../governance/governance';
import { describeInputs } from './scorecards';
import { COHORT_LABEL_SQL, RUN_SCORE_COHORT_JOIN } from '../runs/runJoin';
import { getCompletedComparison } from '../comparisons/comparisons';

/** Methods and where each is published (see docs/references.md for the full list the engine follows). */
function methods(settings: Partial<RunSettings> | null, results: RunResults | null): MethodNote[] {
  const o = results?.overall;
  return [
    {
      name: 'Discrimination (AUC)',
      how: 'c-statistic with DeLong standard error and 95% CI; ties count one half.',
      source:
        'DeLong ER, DeLong DM, Clarke-Pearson DL (1988) Biometrics 44:837–845; Sun X, Xu W (2014) IEEE Signal Processing Letters 21:1389–1393',
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
      how: `net benefit across thresholds${settings?.netBenefitThresholds ? ` (${formatThresholdList(settings.netBenefitThresholds)})` : ''} against treat-all and treat-none; sensitivity, specificity, PPV and NPV at chosen thresholds${settings?.thresholds ? ` (${formatThresholdList(settings.thresholds)})` : ''} with Wilson CIs.`,
      source: 'Vickers AJ, Elkin EB (2006) Med Decis Making 26:565–574; Newcombe RG (1998) Stat Med 17:857–872',
    },
    {
      name: 'Sample size adequacy',
      how: `events${o ? ` (${formatCount(o.events)})` : ''} and non-events${o ? ` (${formatCount(o.nonEvents)})` : ''} against published minimums for external validation.`,
      source:
        'Collins GS, Ogundimu EO, Altman DG (2016) Stat Med 35:214–226; Riley RD et al. (2021) Stat Med 40:4230–4251',
    },
    ...(results?.missingData ? [missingDataMethod(results.missingData)] : []),
  ];
}

/** How gaps in the score's predictors were handled, when the cohort has any (or imputation was asked for). */
function missingDataMethod(md: NonNullable<RunResults['missingData']>): MethodNote {
  const cc = `complete cases: ${formatCount(md.completeCase.n)} of ${formatCount(md.rows)} patients, ${formatCount(md.completeCase.leftOut)} with a gap left out`;
  return md.imputed
    ? {
        name: 'Missing predictor values',
        how: `${cc}; beside them multiple imputation by chained equations, ${md.imputed.imputations} imputations, ${md.imputed.iterations} iterations, seed ${md.imputed.seed} (${md.imputed.method}); ${md.imputed.pooling}. ${md.imputed.curvePooling}`,
        source:
          'van Buuren S, Groothuis-Oudshoorn K (2011) J Stat Softw 45(3):1–67; Rubin DB (1987) Multiple Imputation for Nonresponse in Surveys; Barnard J, Rubin DB (1999) Biometrika 86:948–955; Marshall A et al. (2009) BMC Med Res Methodol 9:57; Hoogland J et al. (2020) Stat Med 39:3591–3607',
      }
    : { name: 'Missing predictor values', how: `${cc}.`, source: 'common practice, no single source' };
}

export async function runReport(runId: string): Promise<RunReport> {
  const rows: Record<string, unknown>[] = await dataSource.query(
    `SELECT r.id, r.status, r.engine_version, r.settings, r.results, r.inputs_sha256, r.results_sha256, r.created_at, r.finished_at,
            sv.version, sv.mode, sv.model, sv.probability_column, sv.clinical_status, sv.derived_from_run_id,
            s.name AS score_name, s.citation, s.outcome_definition, s.time_horizon, s.intended_population,
            ${COHORT_LABEL_SQL} AS cohort_label, c.description AS cohort_description,
            to_char(cv.period_start, 'YYYY-MM-DD') AS period_start, to_char(cv.period_end, 'YYYY-MM-DD') AS period_end,
            cv.row_count, cv.events, cv.excluded_count, cv.source_filename, cv.source_sha256
     FROM ${RUN_SCORE_COHORT_JOIN}
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
  // The comparison a review relied on: the current review's, else the latest review's that names one.
  const named = [...reviews]
    .reverse()
    .sort((a, b) => Number(b.current) - Number(a.current))
    .find((v) => v.comparisonId);
  const iso = (v: unknown) => (v ? new Date(v as string).toISOString() : null);
  const inputs = describeInputs(r.mode as string, model, r.probability_column as string | null);
  const bundle: ReportBundle = {
    generatedAt: new Date().toISOString(),
    run: {
      id: runId,
      status: r.status as string,
      engineVersion: (r.engine_version as string | null) ?? null,
      settings,
      inputsSha256: (r.inputs_sha256 as string | null)?.trim() ?? null,
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
      derivedFromRunId: (r.derived_from_run_id as string | null) ?? null,
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
    comparison: named?.comparisonId ? await getCompletedComparison(named.comparisonId) : null,
  };
  if (bundle.comparison)
    bundle.methods.push({
      name: 'Two scores on the same patients',
      how: `paired DeLong test of the AUC difference with its Wald 95% CI; net-benefit difference at each threshold${bundle.comparison.results.bootstrap ? ` with a paired percentile bootstrap 95% CI (${formatCount(bundle.comparison.results.bootstrap.replicates)} replicates, seed ${bundle.comparison.results.bootstrap.seed})` : ''}.`,
      source:
        'DeLong ER, DeLong DM, Clarke-Pearson DL (1988) Biometrics 44:837–845; Vickers AJ, Elkin EB (2006) Med Decis Making 26:565–574; Efron B, Tibshirani RJ (1993) An Introduction to the Bootstrap',
    });
  // The checklist is derived from the same bundle the report is rendered from (shared/src/report.ts).
  return { ...bundle, checklist: reportChecklist(bundle), checklistSource: CHECKLIST_SOURCE };
}
