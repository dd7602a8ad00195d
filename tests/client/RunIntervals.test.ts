// The run page with bootstrap replicates, fed the engine's own results on an invented cohort: each headline figure
// carries its bootstrap CI, the calibration plot draws the pointwise band and says what it is, the decision curve
// switches to standardised net benefit with treat-all and treat-none on the same scale, and the subgroup section draws
// one smoothed curve per level with a column selector and a toggle per level.
import { flushPromises, mount } from '@vue/test-utils';
import { createPinia, setActivePinia } from 'pinia';
import { describe, expect, it, vi } from 'vitest';
import { createMemoryHistory, createRouter } from 'vue-router';
import { createVuetify } from 'vuetify';
import { formatCount, formatEstimate, formatFigure, formatPercentTrim } from '@shared/format';
import type { RunDetail, RunResults } from '@shared/runs';
import type { ValidationResult } from '@shared/validation';
import CalibrationCurveChart from '@/components/CalibrationCurveChart.vue';
import DecisionCurveChart from '@/components/DecisionCurveChart.vue';
import RunSubgroupCalibrationChart from '@/components/RunSubgroupCalibrationChart.vue';
import RunView from '@/views/RunView.vue';
import { calibrationBand } from '../../server/src/stats/bootstrap';
import { subgroupAnalysis } from '../../server/src/stats/groupPerformance';
import { resolveSettings, validate } from '../../server/src/stats/index';
import { cohort } from '../reference/tools';

// happy-dom has no canvas: the stub keeps what each chart hands chart.js, so the test can read it.
vi.mock('vue-chartjs', () => ({
  Scatter: { name: 'Scatter', props: ['data', 'options', 'plugins'], template: '<canvas />' },
  Line: { name: 'Line', props: ['data', 'options', 'plugins'], template: '<canvas />' },
  Bar: { name: 'Bar', props: ['data', 'options', 'plugins'], template: '<canvas />' },
}));
let detail: RunDetail;
vi.mock('@/api/runs', () => ({ getRun: async () => detail, reproduceRun: async () => null }));

// Whole pages and charts mount here: allow for a busy 2-core machine rather than vitest's 5 s.
vi.setConfig({ testTimeout: 60_000 });

const vuetify = createVuetify();
const settings = resolveSettings({ bootstrapReplicates: 40, bootstrapSeed: 11 });
const { p, y } = cohort(3000, 23, { digits: 8 });
const overall = validate(p, y, settings);
const band = calibrationBand(p, y, overall.calibrationCurve.smoothed, settings);
const sex = Array.from({ length: p.length }, (_, i) => (i % 50 === 0 ? 'unknown' : i % 2 ? 'male' : 'female'));
const ageBand = Array.from({ length: p.length }, (_, i) => ['18-64', '65-79', '80+'][i % 3]);
const analyses = [
  { column: 'sex', ...subgroupAnalysis(p, y, sex) },
  { column: 'age band', ...subgroupAnalysis(p, y, ageBand) },
];

interface Dataset {
  label: string;
  data: { x: number; y: number }[];
  fill?: string;
  borderDash?: number[];
}
const chartsOf = (w: ReturnType<typeof mount>) =>
  w.findAllComponents({ name: 'Scatter' }).map((c) => ({
    datasets: (c.props('data') as { datasets: Dataset[] }).datasets,
    options: c.props('options') as {
      scales: { y: { min: number; max: number; title: { text: string } } };
      plugins: { legend: { labels?: { filter?: (item: { text: string }) => boolean } } };
    },
  }));
const points = (xs: number[], ys: number[]) => xs.map((x, i) => ({ x, y: ys[i] }));
const interval = (key: string) => overall.bootstrap!.intervals[key];
const withCi = (figure: Parameters<typeof formatEstimate>[0], value: number, key: string) =>
  formatEstimate(figure, { estimate: value, lower: interval(key).lower, upper: interval(key).upper });

describe('the run page with bootstrap replicates', () => {
  it('shows the bootstrap CI beside Brier, scaled Brier, ICI, E50, E90 and Emax, and says how they were made', async () => {
    const results: RunResults = {
      overall,
      subgroups: [],
      periods: [],
      minSubgroupEvents: 10,
      subgroupAnalyses: analyses,
      calibrationBand: band,
    };
    detail = {
      id: '00000000-0000-4000-8000-000000000001',
      status: 'completed',
      scoreName: 'Invented score',
      scoreVersion: 1,
      cohortName: 'Invented cohort',
      cohortVersion: 1,
      cohortLabel: '',
      progress: 1,
      createdAt: '2026-01-01T00:00:00Z',
      finishedAt: '2026-01-01T00:01:00Z',
      settings: {
        thresholds: [0.1, 0.2],
        netBenefitThresholds: overall.netBenefit.map((r) => r.threshold),
        bootstrapReplicates: 40,
        bootstrapSeed: 11,
      },
      results,
    } as unknown as RunDetail;
    setActivePinia(createPinia());
    const router = createRouter({
      history: createMemoryHistory(),
      routes: [{ path: '/runs/:id', name: 'run', component: RunView }],
    });
    await router.push(`/runs/${detail.id}`);
    const w = mount(RunView, {
      global: { plugins: [vuetify, router], stubs: { RunGovernance: true, RecalibrateDialog: true } },
    });
    await flushPromises();
    const text = w.text();
    expect(text).toContain(withCi('brier', overall.brier, 'brier'));
    expect(text).toContain(`scaled ${withCi('scaledBrier', overall.scaledBrier, 'scaledBrier')}`);
    expect(text).toContain(withCi('ici', overall.ici, 'ici'));
    expect(text).toContain(`E50 ${withCi('ici', overall.e50, 'e50')}`);
    expect(text).toContain(`E90 ${withCi('ici', overall.e90, 'e90')}`);
    expect(text).toContain(`Emax ${withCi('ici', overall.emax, 'emax')}`);
    expect(text).toContain('Bootstrap: 40 replicates, seed 11');
    // The net benefit at the run's thresholds, with its CI, under the decision curve.
    const marks = w.find('[data-test="decision-curve-marks"]').text();
    for (const t of [0.1, 0.2]) {
      const nb = overall.netBenefit.find((r) => r.threshold === t)!;
      expect(marks).toContain(`at ${formatPercentTrim(t)} ${withCi('netBenefit', nb.model, `netBenefit@${t}`)}`);
    }
    // The band reaches the calibration chart, and the subgroup curves the subgroup section.
    expect(w.find('[data-test="calibration-band-note"]').exists()).toBe(true);
    expect(w.find('[data-test="subgroup-calibration"]').exists()).toBe(true);
    w.unmount();
  });
});

describe('the calibration plot', () => {
  it("draws the engine's pointwise band around the loess curve and says what it is", () => {
    const w = mount(CalibrationCurveChart, { props: { result: overall, band }, global: { plugins: [vuetify] } });
    const [chart] = chartsOf(w);
    const lower = chart.datasets.find((d) => d.label === '')!;
    const upper = chart.datasets.find((d) => d.label.includes('bootstrap band'))!;
    expect(lower.data).toEqual(points(band.p, band.lower));
    expect(upper.data).toEqual(points(band.p, band.upper));
    expect(upper.fill).toBe('-1'); // filled down to the lower edge
    expect(band.lower.every((l, i) => l <= band.upper[i])).toBe(true);
    // The unlabelled lower edge stays out of the legend.
    expect(chart.options.plugins.legend.labels!.filter!({ text: '' })).toBe(false);
    const note = w.find('[data-test="calibration-band-note"]').text();
    expect(note).toContain('pointwise 95% bootstrap percentile band');
    expect(note).toContain(`each of its ${band.p.length} points`);
    expect(note).toContain('40 replicates, seed 11');
  });

  it('without replicates draws no band and says nothing of one', () => {
    const plain = validate(p, y);
    const w = mount(CalibrationCurveChart, { props: { result: plain }, global: { plugins: [vuetify] } });
    expect(chartsOf(w)[0].datasets.some((d) => d.label.includes('band') || d.fill)).toBe(false);
    expect(w.find('[data-test="calibration-band-note"]').exists()).toBe(false);
  });
});

describe('the decision curve', () => {
  const mountCurve = (result: ValidationResult) =>
    mount(DecisionCurveChart, {
      props: {
        rows: result.netBenefit,
        eventRate: result.eventRate,
        bootstrap: result.bootstrap,
        marks: [0.1, 0.3],
      },
      global: { plugins: [vuetify] },
    });
  const line = (w: ReturnType<typeof mount>, label: string) =>
    chartsOf(w)[0].datasets.find((d) => d.label === label)!.data;

  it('draws net benefit with its bootstrap CI band, then switches to standardised net benefit on one scale', async () => {
    const w = mountCurve(overall);
    const rows = overall.netBenefit;
    expect(line(w, 'Use the score')).toEqual(
      points(
        rows.map((r) => r.threshold),
        rows.map((r) => r.model),
      ),
    );
    expect(line(w, 'Score: 95% bootstrap CI')).toEqual(
      points(
        rows.map((r) => r.threshold),
        rows.map((r) => interval(`netBenefit@${r.threshold}`).upper),
      ),
    );
    expect(chartsOf(w)[0].options.scales.y.title.text).toBe('Net benefit');

    await w.find('[data-test="decision-curve-scale"] button[value="standardised"]').trigger('click');
    const chart = chartsOf(w)[0];
    expect(chart.options.scales.y.title.text).toBe('Standardised net benefit');
    expect(chart.options.scales.y.max).toBeCloseTo(1.05, 12); // 1 is a perfect score
    const thresholds = rows.map((r) => r.threshold);
    expect(line(w, 'Use the score')).toEqual(
      points(
        thresholds,
        rows.map((r) => r.standardized!),
      ),
    ); // engine's Kerr et al. 2016 value
    // Treat all and treat none on the same scale: divided by the prevalence.
    expect(line(w, 'Treat all')).toEqual(
      points(
        thresholds,
        rows.map((r) => r.treatAll / overall.eventRate),
      ),
    );
    expect(line(w, 'Treat none')).toEqual(
      points(
        thresholds,
        rows.map(() => 0),
      ),
    );
    expect(line(w, '')).toEqual(
      points(
        thresholds,
        thresholds.map((t) => interval(`standardizedNetBenefit@${t}`).lower),
      ),
    );
    const marks = w.find('[data-test="decision-curve-marks"]').text();
    const at30 = rows.find((r) => r.threshold === 0.3)!;
    expect(marks).toContain('Standardised net benefit of the score (bootstrap 95% CI)');
    expect(marks).toContain(`at 30% ${withCi('netBenefit', at30.standardized!, 'standardizedNetBenefit@0.3')}`);
    expect(marks).toContain(`treat all ${formatFigure('netBenefit', at30.treatAll / overall.eventRate)}`);
    expect(w.find('[data-test="decision-curve-band"]').text()).toContain('40 replicates, seed 11');
  });

  it('without replicates draws no band and states the figures alone', () => {
    const plain = validate(p, y);
    const w = mountCurve(plain);
    expect(chartsOf(w)[0].datasets.map((d) => d.label)).toEqual(['Use the score', 'Treat all', 'Treat none']);
    expect(w.find('[data-test="decision-curve-band"]').exists()).toBe(false);
    const at10 = plain.netBenefit.find((r) => r.threshold === 0.1)!;
    expect(w.find('[data-test="decision-curve-marks"]').text()).toContain(
      `at 10% ${formatFigure('netBenefit', at10.model)}, treat all`,
    );
  });
});

describe('calibration curves by subgroup', () => {
  const mountCurves = (a: { column: string; levels: (typeof analyses)[number]['levels'] }[]) =>
    mount(RunSubgroupCalibrationChart, { props: { analyses: a, overall }, global: { plugins: [vuetify] } });
  const curveOf = (column: number, level: string) => {
    const c = analyses[column].levels.find((l) => l.level === level)!.calibrationCurve!;
    return points(c.p, c.observed);
  };

  it("draws each level's own smoothed curve, the small level dashed and marked †, with the whole cohort's", () => {
    const w = mountCurves(analyses);
    const ds = chartsOf(w)[0].datasets;
    expect(ds.map((d) => d.label)).toEqual([
      `female (n = ${formatCount(analyses[0].levels[0].n)})`,
      `male (n = ${formatCount(analyses[0].levels[1].n)})`,
      `unknown † (n = ${formatCount(analyses[0].levels[2].n)})`,
      'Whole cohort',
      'Ideal (observed = predicted)',
    ]);
    expect(ds[0].data).toEqual(curveOf(0, 'female'));
    expect(ds[2].data).toEqual(curveOf(0, 'unknown'));
    expect(ds[2].borderDash).toBeTruthy();
    expect(ds[0].borderDash).toBeUndefined();
    expect(ds[3].data).toEqual(points(overall.calibrationCurve.smoothed.p, overall.calibrationCurve.smoothed.observed));
    const method = w.find('[data-test="subgroup-calibration-method"]').text();
    expect(method).toContain(`span ${overall.calibrationCurve.span}`);
    expect(method).toContain('no robustness iterations');
    expect(method).toContain("the whole cohort's smoother fitted to that group's patients alone");
  });

  it('hides a level when its toggle is switched off, and shows the chosen column', async () => {
    const w = mountCurves(analyses);
    await w.find('[data-test="curve-toggle-male"]').trigger('click');
    expect(chartsOf(w)[0].datasets.map((d) => d.label.split(' ')[0])).toEqual(['female', 'unknown', 'Whole', 'Ideal']);
    await w.findComponent({ name: 'VSelect' }).setValue('age band');
    const labels = chartsOf(w)[0].datasets.map((d) => d.label.split(' ')[0]);
    expect(labels).toEqual(['18-64', '65-79', '80+', 'Whole', 'Ideal']); // every level of the new column shown
    expect(chartsOf(w)[0].datasets[1].data).toEqual(curveOf(1, '65-79'));
    expect(w.text()).toContain('Calibration by age band');
  });

  it('names a level the engine refused, and a run stored before the curves were kept', () => {
    const tiny = {
      column: 'sex',
      ...subgroupAnalysis(
        p,
        Uint8Array.from(y, (v, i) => (i < 5 ? 0 : v)),
        sex.map((g, i) => (i < 5 ? 'tiny' : g)),
      ),
    };
    const w = mountCurves([tiny]);
    const refused = tiny.levels.find((l) => l.level === 'tiny')!;
    expect(w.text()).toContain(`No curve for tiny: ${refused.error}`);
    expect(chartsOf(w)[0].datasets.some((d) => d.label.startsWith('tiny'))).toBe(false);

    const old = analyses.map((a) => ({ ...a, levels: a.levels.map(({ calibrationCurve: _, ...l }) => l) }));
    const w2 = mountCurves(old);
    expect(w2.find('[data-test="subgroup-calibration-missing"]').exists()).toBe(true);
    expect(w.find('[data-test="subgroup-calibration-missing"]').exists()).toBe(false);
  });
});
