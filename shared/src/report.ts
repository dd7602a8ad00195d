// What the validation report contains, decided once from the report bundle: the client shows a part only when it is
// true here, and the reporting checklist marks an item present only when its part is shown — the same data decides
// both, so the checklist cannot claim a table the report lacks.
import type { ChecklistItem, RunReport } from './governance';
import type { RunResults, RunSettings } from './runs';
import { formatCount, formatThresholdList } from './format';

/** The parts of the printed report, each rendered with `data-report-part="<part>"`. */
export const REPORT_PARTS = [
  'title',
  'summary',
  'citation',
  'outcome',
  'inputs',
  'derivation',
  'cohortSource',
  'period',
  'cohortDescription',
  'excluded',
  'methods',
  'settings',
  'results',
  'thresholds',
  'subgroups',
  'periods',
  'comparison',
  'missingData',
  'review',
  'signatures',
] as const;
export type ReportPart = (typeof REPORT_PARTS)[number];

export type ReportBundle = Omit<RunReport, 'checklist' | 'checklistSource'>;

/** Which parts this report shows. */
export function reportContents(r: ReportBundle): Record<ReportPart, boolean> {
  const results = (r.results as RunResults | null) ?? null;
  const settings = r.run.settings as Partial<RunSettings> | null;
  return {
    title: true,
    summary: !!results?.overall,
    citation: !!r.score.citation?.trim(),
    outcome: !!r.score.predicts?.trim(),
    inputs: r.score.inputs.length > 0,
    derivation: !!r.score.derivedFromRunId,
    cohortSource: !!r.cohort.sourceSha256,
    period: !!(r.cohort.periodStart && r.cohort.periodEnd),
    cohortDescription: !!r.cohort.description?.trim(),
    excluded: typeof r.cohort.excluded === 'number',
    methods: r.methods.length > 0,
    settings: !!settings && Object.keys(settings).length > 0,
    results: !!results?.overall,
    thresholds: !!results?.overall?.thresholds?.length,
    subgroups: !!results?.subgroups?.length,
    periods: !!results?.periods?.length,
    comparison: !!r.comparison,
    missingData: !!results?.missingData,
    review: r.reviews.some((v) => v.current),
    signatures: true,
  };
}

export const CHECKLIST_SOURCE =
  'Items paraphrased in our own words from the TRIPOD statement for validation studies (Collins GS, Reitsma JB, Altman DG, Moons KGM (2015). BMJ 350:g7594); consult the statement for its exact wording.';

/**
 * The TRIPOD validation items and where this report answers each. An item is present only when every part it
 * names is shown; items Plumbline does not record name no part and are always absent.
 */
export function reportChecklist(r: ReportBundle): ChecklistItem[] {
  const has = reportContents(r);
  const item = (
    code: string,
    topic: string,
    text: string,
    parts: ReportPart[],
    where: string,
    whereAbsent = 'not in this report',
  ): ChecklistItem => {
    const present = parts.length > 0 && parts.every((p) => has[p]);
    return { code, topic, item: text, present, where: present ? where : whereAbsent, parts };
  };
  const notRecorded = 'not recorded by Plumbline';
  return [
    item(
      '1',
      'Title',
      'Say that this is a validation of a prediction model, for whom, and for which outcome.',
      ['title'],
      'report heading',
    ),
    item(
      '2',
      'Abstract',
      'Give a short summary of aims, data, methods, results and conclusions.',
      ['summary'],
      'summary',
      'the run has no results',
    ),
    item(
      '3a',
      'Background',
      'Explain the clinical context and cite the model being validated.',
      ['citation'],
      'score (published source)',
      'no published source recorded',
    ),
    item(
      '3b',
      'Objectives',
      'State that the aim is to check an existing model on new data.',
      ['title'],
      'report heading',
    ),
    item(
      '4a',
      'Source of data',
      'Describe where the data come from (design, registry, file).',
      ['cohortSource'],
      'cohort (source file and SHA-256)',
    ),
    item(
      '4b',
      'Source of data',
      'Give the start and end dates of the period covered.',
      ['period'],
      'cohort (period)',
      'no period recorded for this cohort',
    ),
    item(
      '5a',
      'Participants',
      'Describe the setting and locations where patients were treated.',
      ['cohortDescription'],
      'cohort description',
      'no cohort description recorded',
    ),
    item(
      '5b',
      'Participants',
      'Give the eligibility criteria of the patients included.',
      ['cohortDescription'],
      'cohort description and intended population',
      'no cohort description recorded',
    ),
    item('5c', 'Participants', 'Describe any treatment the patients received, where relevant.', [], '', notRecorded),
    item(
      '6a',
      'Outcome',
      'Define the outcome, how and when it was assessed.',
      ['outcome'],
      'score (outcome and time horizon)',
      'no outcome definition recorded',
    ),
    item('6b', 'Outcome', 'Say whether outcome assessment was blind to the predictors.', [], '', notRecorded),
    item(
      '7a',
      'Predictors',
      'Define every predictor and how it was measured.',
      ['inputs'],
      'score (inputs)',
      'no inputs recorded',
    ),
    item('7b', 'Predictors', 'Say whether predictor assessment was blind to the outcome.', [], '', notRecorded),
    item(
      '8',
      'Sample size',
      'Explain how the sample size was reached and whether it suffices.',
      ['results'],
      'results (events, non-events, adequacy warnings)',
      'the run has no results',
    ),
    item(
      '9',
      'Missing data',
      'Describe how missing or invalid values were handled.',
      has.missingData ? ['excluded', 'missingData'] : ['excluded'],
      has.missingData
        ? 'cohort (rows excluded at upload) and missing data (complete cases and the handling of predictor gaps)'
        : 'cohort (rows excluded at upload)',
    ),
    item(
      '10c',
      'Analysis',
      'Describe how predictions were computed for the validation data.',
      ['inputs', 'methods'],
      'score (form and inputs) and methods',
    ),
    item(
      '10d',
      'Analysis',
      'Name every measure used to judge performance.',
      ['methods', 'settings'],
      'methods and run settings',
    ),
    item(
      '10e',
      'Analysis',
      'Describe any updating of the model that followed the validation.',
      ['derivation'],
      'score (derivation of this version)',
      'this version is not an update',
    ),
    item(
      '11',
      'Risk groups',
      'Give details of any risk thresholds or groups used.',
      ['thresholds'],
      'threshold table',
      'no threshold table in this run',
    ),
    item(
      '12',
      'Development vs validation',
      'Compare setting, eligibility, outcome and predictors with the development study.',
      [],
      '',
      notRecorded,
    ),
    item(
      '13a',
      'Participants',
      'Give the flow of patients: numbers included, excluded, with and without the outcome.',
      ['excluded', 'results'],
      'cohort and results',
      'the run has no results',
    ),
    item(
      '13b',
      'Participants',
      'Describe the patients’ characteristics.',
      ['subgroups'],
      'subgroup table',
      'no subgroup columns in this run',
    ),
    item(
      '13c',
      'Participants',
      'Compare the distribution of predictors with the development data.',
      [],
      '',
      notRecorded,
    ),
    item(
      '16',
      'Model performance',
      'Report performance measures with confidence intervals.',
      ['results'],
      'results',
      'the run has no results',
    ),
    item(
      '17',
      'Model updating',
      'Report the results of any model updating.',
      ['derivation'],
      'score (derivation of this version)',
      'this version is not an update',
    ),
    item(
      '18',
      'Limitations',
      'Discuss limitations (e.g. small numbers, missing data).',
      ['review'],
      'review reasoning and warnings',
      'no review yet',
    ),
    item(
      '19a',
      'Interpretation',
      'Interpret the results against the published performance.',
      ['review'],
      'review reasoning',
      'no review yet',
    ),
    item(
      '20',
      'Implications',
      'Discuss possible clinical use and further research.',
      ['review', 'signatures'],
      'review verdict and signature manifest',
      'no review yet',
    ),
    item(
      '21',
      'Supplementary',
      'Say where more information (data, code, settings) can be found.',
      ['settings', 'results'],
      'run settings, engine version and results SHA-256',
      'the run has no results',
    ),
    item('22', 'Funding', 'Give the source of funding and the funders’ role.', [], '', notRecorded),
  ];
}

const TIME_GROUPING_WORDS: Record<string, string> = {
  none: 'not grouped by time',
  month: 'by calendar month',
  quarter: 'by calendar quarter',
};

/** The run settings as named settings in words, in a fixed order (for the report and the run page). */
export function describeRunSettings(s: Partial<RunSettings> | null | undefined): { name: string; value: string }[] {
  if (!s) return [];
  const rows: { name: string; value: string }[] = [];
  const add = (name: string, value: string | undefined) => {
    if (value !== undefined) rows.push({ name, value });
  };
  add('Risk thresholds (sensitivity, specificity, PPV, NPV)', s.thresholds && formatThresholdList(s.thresholds));
  add('Decision-curve thresholds (net benefit)', s.netBenefitThresholds && formatThresholdList(s.netBenefitThresholds));
  add(
    'Calibration curve',
    s.calibrationGroups !== undefined
      ? `${s.calibrationGroups} risk groups; loess span ${s.loessSpan ?? '—'}`
      : undefined,
  );
  add('Hosmer–Lemeshow test', s.hosmerLemeshowGroups !== undefined ? `${s.hosmerLemeshowGroups} groups` : undefined);
  add(
    'Bootstrap',
    s.bootstrapReplicates === undefined
      ? undefined
      : s.bootstrapReplicates > 0
        ? `${formatCount(s.bootstrapReplicates)} replicates, seed ${s.bootstrapSeed}`
        : 'off',
  );
  add('Subgroup columns', s.subgroupColumns && (s.subgroupColumns.length ? s.subgroupColumns.join(', ') : 'none'));
  add('Periods', s.timeGrouping && (TIME_GROUPING_WORDS[s.timeGrouping] ?? s.timeGrouping));
  if (s.missingData)
    add(
      'Missing predictor values',
      s.missingData.method === 'multiple-imputation'
        ? `multiple imputation: ${s.missingData.imputations} imputations, ${s.missingData.iterations} iterations, seed ${s.missingData.seed}${s.missingData.extraColumns.length ? `; imputation models also use ${s.missingData.extraColumns.join(', ')}` : ''}`
        : 'complete cases',
    );
  return rows;
}
