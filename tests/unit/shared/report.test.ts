// What the validation report contains and the checklist built from it (shared/src/report.ts): an item is present only
// when the parts it names are in the bundle, so the checklist cannot claim a table the report does not show.
import { describe, expect, it } from 'vitest';
import type { ReportBundle } from '@shared/report';
import { describeRunSettings, reportChecklist, reportContents } from '@shared/report';
import { defaultRunSettings } from '@shared/runs';

const est = (estimate: number) => ({ estimate, lower: estimate - 0.1, upper: estimate + 0.1 });

function bundle(
  over: {
    thresholds?: unknown[];
    periods?: unknown[];
    subgroups?: unknown[];
    results?: boolean;
    derived?: boolean;
    missingData?: unknown;
  } = {},
): ReportBundle {
  const results =
    over.results === false
      ? null
      : {
          overall: { n: 100, events: 20, auc: est(0.7), thresholds: over.thresholds ?? [] },
          subgroups: over.subgroups ?? [],
          periods: over.periods ?? [],
          minSubgroupEvents: 10,
          ...(over.missingData ? { missingData: over.missingData } : {}),
        };
  return {
    generatedAt: '2026-12-03T10:00:00Z',
    run: {
      id: 'r',
      status: 'completed',
      engineVersion: '1',
      settings: defaultRunSettings(),
      inputsSha256: 'a'.repeat(64),
      resultsSha256: 'b'.repeat(64),
      createdAt: null,
      completedAt: null,
    },
    score: {
      name: 'S',
      version: 1,
      mode: 'formula',
      citation: 'Invented (2026)',
      predicts: 'readmission',
      horizon: '30 days',
      forWhom: 'adults',
      inputs: [{ name: 'age', how: 'linear' }],
      intercept: -2,
      clinicalStatus: 'draft',
      derivedFromRunId: over.derived ? 'r0' : null,
    },
    cohort: {
      label: 'Q1',
      description: '',
      periodStart: null,
      periodEnd: null,
      patients: 100,
      events: 20,
      excluded: 0,
      sourceFilename: 'q1.csv',
      sourceSha256: 'c'.repeat(64),
    },
    results,
    methods: [{ name: 'AUC', how: 'DeLong', source: 'DeLong 1988' }],
    reviews: [],
    signatures: [],
  };
}
const item = (b: ReportBundle, code: string) => reportChecklist(b).find((i) => i.code === code)!;

describe('reportChecklist', () => {
  it('marks the threshold item absent when the run has no threshold table', () => {
    expect(reportContents(bundle()).thresholds).toBe(false);
    expect(item(bundle(), '11')).toMatchObject({ present: false, parts: ['thresholds'] });
    expect(item(bundle({ thresholds: [{ threshold: 0.1 }] }), '11')).toMatchObject({
      present: true,
      where: 'threshold table',
    });
  });

  it('ties every present item to parts the report shows, and never marks what Plumbline does not record', () => {
    const b = bundle({ thresholds: [{}], subgroups: [{}], periods: [{}] });
    const has = reportContents(b);
    for (const i of reportChecklist(b)) {
      expect(i.present, i.code).toBe(i.parts.length > 0 && i.parts.every((p) => has[p as keyof typeof has]));
    }
    for (const code of ['5c', '6b', '7b', '12', '13c', '22']) expect(item(b, code).present, code).toBe(false);
  });

  it('needs a review for the interpretation items and results for the performance items', () => {
    expect(item(bundle(), '19a').present).toBe(false);
    expect(item(bundle({ results: false }), '16').present).toBe(false);
    expect(item(bundle(), '16').present).toBe(true);
  });

  it('answers the missing-data item from the missing-data part when the run reports gaps, else from the exclusions', () => {
    expect(reportContents(bundle()).missingData).toBe(false);
    expect(item(bundle(), '9')).toMatchObject({ present: true, parts: ['excluded'] });
    const b = bundle({ missingData: { method: 'complete-case', rowsWithGaps: 12 } });
    expect(reportContents(b).missingData).toBe(true);
    expect(item(b, '9')).toMatchObject({ present: true, parts: ['excluded', 'missingData'] });
    expect(item(b, '9').where).toMatch(/missing data/);
  });

  it('counts an update only when the version was derived from a run', () => {
    expect(item(bundle(), '10e').present).toBe(false);
    expect(item(bundle({ derived: true }), '17').present).toBe(true);
  });
});

describe('describeRunSettings', () => {
  it('names every setting in words, with the 50 net-benefit thresholds as one ladder', () => {
    const rows = describeRunSettings(defaultRunSettings());
    expect(rows.map((r) => r.name)).toEqual([
      'Risk thresholds (sensitivity, specificity, PPV, NPV)',
      'Decision-curve thresholds (net benefit)',
      'Calibration curve',
      'Hosmer–Lemeshow test',
      'Bootstrap',
      'Subgroup columns',
      'Periods',
    ]);
    expect(rows[0].value).toBe('5%, 10%, 20%, 30%, 50%');
    expect(rows[1].value).toBe('1% to 50% in steps of 1% (50 thresholds)');
    expect(rows[4].value).toBe('off');
    expect(rows[6].value).toBe('not grouped by time');
    expect(describeRunSettings({ ...defaultRunSettings(), bootstrapReplicates: 2000, bootstrapSeed: 7 })[4].value).toBe(
      '2,000 replicates, seed 7',
    );
    const mi = describeRunSettings({
      ...defaultRunSettings(),
      missingData: { method: 'multiple-imputation', imputations: 20, iterations: 5, seed: 9, extraColumns: ['unit'] },
    });
    expect(mi.at(-1)).toEqual({
      name: 'Missing predictor values',
      value: 'multiple imputation: 20 imputations, 5 iterations, seed 9; imputation models also use unit',
    });
  });
});
