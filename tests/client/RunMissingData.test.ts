// The run page's "Missing data" section, fed the run's own missing-data analysis (server/src/domain/runs/
// runMissingData.ts) on an invented cohort with gaps missing at random: the counts and the patients left out, the
// warnings, the pooled figures beside the complete-case ones with their variances, df and FMI, how the curves are
// pooled, and what the observed-against-imputed plots and pooled curves are given to draw.
import { mount } from '@vue/test-utils';
import { describe, expect, it, vi } from 'vitest';
import { createVuetify } from 'vuetify';
import { formatCount, formatFigure, formatNumber, formatPercent } from '@shared/format';
import type { ScoreModel } from '@shared/model';
import { runSettingsSchema } from '@shared/runs';
import RunMissingData from '@/components/RunMissingData.vue';
import { completeCaseData, missingDataAnalysis, predictorGaps } from '../../server/src/domain/runs/runMissingData';
import type { CohortData } from '../../server/src/domain/cohorts/cohortData';
import { mulberry32 } from '../../server/src/stats/bootstrap';
import { computeFullSet, resolveSettings } from '../../server/src/stats/fullSet';
import { riskFromColumns } from '../../server/src/stats/pooledValidation';
import { normalDraw } from '../../server/src/stats/randomDraws';

// happy-dom has no canvas: the stubs keep what each chart is handed, so the test can read it.
vi.mock('vue-chartjs', () => ({
  Scatter: { name: 'Scatter', props: ['data', 'options', 'plugins'], template: '<canvas />' },
  Bar: { name: 'Bar', props: ['data', 'options'], template: '<canvas />' },
}));

const vuetify = createVuetify();
const MODEL: ScoreModel = {
  intercept: -5,
  predictors: [
    { column: 'age', coefficient: 0.04, transform: 'linear' },
    { column: 'lab', coefficient: 0.6, transform: 'log' },
    { column: 'urgent', coefficient: 0.5, transform: 'indicator', level: 'yes' },
  ],
};

/** 1,500 invented patients; lab is missing far more often for patients with the event, urgent now and then. */
function cohortWithGaps(): CohortData {
  const r = mulberry32(808);
  const n = 1500;
  const age: (number | null)[] = [];
  const lab: (number | null)[] = [];
  const urgent: (string | null)[] = [];
  const outcome = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    const a = Math.round(65 + 12 * normalDraw(r));
    const l = Math.round(Math.exp(1.5 + 0.5 * normalDraw(r)) * 10) / 10;
    const u = r() < 0.4 ? 'yes' : 'no';
    const lp = -5 + 0.04 * a + 0.6 * Math.log(l) + (u === 'yes' ? 0.5 : 0);
    outcome[i] = r() < 1 / (1 + Math.exp(-lp)) ? 1 : 0;
    age.push(a);
    lab.push(r() < (outcome[i] ? 0.5 : 0.08) ? null : l);
    urgent.push(r() < 0.05 ? null : u);
  }
  return {
    cohortVersionId: 'invented',
    n,
    outcome,
    lineNo: Int32Array.from({ length: n }, (_, i) => i + 2),
    columns: { age, lab, urgent },
    eventDate: new Array(n).fill(null),
    subgroups: {},
  };
}

const data = cohortWithGaps();
const score = { mode: 'formula' as const, model: MODEL, probabilityColumn: null };
const engine = resolveSettings({ bootstrapReplicates: 0 });

function analysis(settings: unknown) {
  const s = runSettingsSchema.parse(settings);
  const gaps = predictorGaps(score, data)!;
  const cc = completeCaseData(score, data, gaps);
  const kinds = {
    age: { name: 'age', kind: 'numeric' as const, values: Float64Array.from(cc.columns.age as number[]) },
    lab: { name: 'lab', kind: 'numeric' as const, values: Float64Array.from(cc.columns.lab as number[]) },
    urgent: {
      name: 'urgent',
      kind: 'binary' as const,
      levels: 2,
      levelNames: ['no', 'yes'],
      values: Float64Array.from(cc.columns.urgent as string[], (v) => (v === 'yes' ? 1 : 0)),
    },
  };
  const p = riskFromColumns(MODEL, kinds, {
    age: kinds.age.values,
    lab: kinds.lab.values,
    urgent: kinds.urgent.values,
  });
  const completeCase = computeFullSet(p, cc.outcome, engine);
  return missingDataAnalysis({ score, data, settings: s, gaps, completeCase, engineSettings: engine });
}

const imputed = analysis({ missingData: { method: 'multiple-imputation', imputations: 5, iterations: 3, seed: 31 } });
const completeOnly = analysis({});

const mountIt = (props: Record<string, unknown>) =>
  mount(RunMissingData, { props: { filename: 'run', ...props }, global: { plugins: [vuetify] } });

describe('Missing data, complete cases beside multiple imputation', () => {
  const w = mountIt({ missingData: imputed });
  const md = imputed;

  it('says how many patients have a gap and how the patients left out differ', () => {
    expect(md.rowsWithGaps).toBeGreaterThan(100);
    const summary = w.find('[data-test="missing-data-summary"]').text();
    expect(summary).toContain(`${formatCount(md.rowsWithGaps)} of ${formatCount(1500)} patients`);
    expect(summary).toContain(formatPercent(md.shareIncomplete));
    expect(summary).toContain('complete cases');
    const leftOut = w.find('[data-test="missing-data-left-out"]').text();
    expect(leftOut).toContain(`Left out: ${formatCount(md.completeCase.leftOut)} patients`);
    expect(leftOut).toContain(formatPercent(md.completeCase.eventRateLeftOut));
    // the gaps in lab follow the outcome: those left out have more events
    expect(md.completeCase.eventRateLeftOut!).toBeGreaterThan(md.completeCase.eventRateKept!);
    const age = md.completeCase.comparison.find((c) => c.column === 'age')!;
    expect(w.text()).toContain(`mean ${formatNumber(age.leftOut.mean, 2)}`);
  });

  it('shows the warnings and states the rules behind them', () => {
    const warn = w.find('[data-test="missing-data-warnings"]').text();
    expect(warn).toContain('have a gap in a predictor the score uses');
    expect(w.text()).toContain('5 %');
    expect(w.text()).toContain('1.96');
  });

  it('puts each pooled figure beside its complete-case one, with within, between, total variance, df and FMI', () => {
    expect(md.imputed!.metrics.map((m) => m.key)).toEqual(['auc', 'calibrationIntercept', 'calibrationSlope', 'oe']);
    for (const m of md.imputed!.metrics) {
      const row = w.find(`[data-test="pooled-${m.key}"]`).text();
      expect(row).toContain(formatFigure(m.key, m.estimate));
      expect(row).toContain(formatFigure(m.key, m.completeCase!.estimate));
      expect(row).toContain(formatNumber(m.fmi, 3));
      expect(row).toContain(formatNumber(m.df, 1));
      expect(row.includes('disagree')).toBe(m.disagrees);
    }
    expect(w.find('[data-test="missing-data-method"]').text()).toContain('5 imputations, 3 iterations, seed 31');
    expect(w.find('[data-test="missing-data-curve-pooling"]').text()).toContain('common grid');
  });

  it('hands the pooled curves and the observed-against-imputed distributions to the charts', () => {
    const scatters = w.findAllComponents({ name: 'Scatter' });
    const roc = (scatters[0].props('data') as { datasets: { data: { x: number; y: number }[] }[] }).datasets[0].data;
    expect(roc).toHaveLength(101);
    expect(roc.map((p) => p.y)).toEqual(md.imputed!.rocCurve.tpr);
    const cal = (scatters[1].props('data') as { datasets: { data: { x: number; y: number }[] }[] }).datasets[0].data;
    expect(cal.map((p) => p.x)).toEqual(md.imputed!.calibrationCurve.p);
    const bars = w.findAllComponents({ name: 'Bar' });
    expect(bars).toHaveLength(md.imputed!.diagnostics.length);
    expect(md.imputed!.diagnostics.map((d) => d.column)).toEqual(['lab', 'urgent']);
    md.imputed!.diagnostics.forEach((d, k) => {
      const sets = (bars[k].props('data') as { datasets: { label: string; data: number[] }[] }).datasets;
      expect(sets.map((s) => s.label)).toEqual(['Observed', 'Imputed']);
      expect(sets[0].data).toEqual(d.bins.map((b) => b.observed));
      expect(sets[1].data).toEqual(d.bins.map((b) => b.imputed));
    });
    const urgent = md.imputed!.diagnostics[1];
    expect(urgent.bins.map((b) => b.label)).toEqual(['no', 'yes']);
    expect(urgent.imputedBy).toBe('logistic regression');
  });

  it('in the printed report shows the tables and words only', () => {
    const printed = mountIt({ missingData: imputed, charts: false });
    expect(printed.findAllComponents({ name: 'Scatter' })).toHaveLength(0);
    expect(printed.findAllComponents({ name: 'Bar' })).toHaveLength(0);
    expect(printed.find('[data-test="missing-data-pooled"]').exists()).toBe(true);
    expect(printed.find('[data-test="missing-data-diagnostics"]').exists()).toBe(true);
  });
});

describe('Missing data, complete cases only', () => {
  it('says the run analyses complete cases and shows no pooled table', () => {
    const w = mountIt({ missingData: completeOnly });
    expect(completeOnly.imputed).toBeNull();
    expect(w.find('[data-test="missing-data-summary"]').text()).toContain('This run analyses complete cases only.');
    expect(w.find('[data-test="missing-data-pooled"]').exists()).toBe(false);
  });
});
