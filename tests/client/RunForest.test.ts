// The run page's "Performance by subgroup" and "Performance by site" sections, fed the engine's own results on an
// invented cohort: a row per level, levels below the minimum events marked (not hidden), refused levels with their
// reason, the heterogeneity test and the random-effects pooling in words, and what the forest plots are given to draw.
import { mount } from '@vue/test-utils';
import { describe, expect, it, vi } from 'vitest';
import { createVuetify } from 'vuetify';
import { formatFigure, formatNumber, formatPValue } from '@shared/format';
import RunSiteForest from '@/components/RunSiteForest.vue';
import RunSubgroupForest from '@/components/RunSubgroupForest.vue';
import { validate } from '../../server/src/stats/index';
import { siteAnalysis, subgroupAnalysis } from '../../server/src/stats/groupPerformance';
import { cohort } from '../reference/tools';

// happy-dom has no canvas: the stub keeps what the forest plot hands chart.js, so the test can read it.
vi.mock('vue-chartjs', () => ({
  Scatter: { name: 'Scatter', props: ['data', 'options', 'plugins'], template: '<canvas />' },
}));

const vuetify = createVuetify();
const { p, y } = cohort(6000, 19, { digits: 8 });
const overall = validate(p, y);
const sex = Array.from({ length: p.length }, (_, i) => (i % 40 === 0 ? 'unknown' : i % 2 ? 'male' : 'female'));
// Four sites; "Annex" is small, and "Outpost" has patients without the event only, so the engine refuses it.
const site = Array.from({ length: p.length }, (_, i) =>
  y[i] === 0 && i % 101 === 5 ? 'Outpost' : i % 60 === 2 ? 'Annex' : ['North', 'South', 'East'][i % 3],
);
const sexAnalysis = { column: 'sex', ...subgroupAnalysis(p, y, sex) };
const sites = { column: 'site', ...siteAnalysis(p, y, site) };

interface Dataset {
  label: string;
  data: { x: number; y: number; xMin: number; xMax: number }[];
  pointStyle?: string;
}
// The forest plots only (each section also has a plot of calibration curves by level: RunIntervals.test.ts).
const chartsOf = (w: ReturnType<typeof mount>) =>
  w
    .findAllComponents({ name: 'ForestPlot' })
    .map((f) => f.findComponent({ name: 'Scatter' }))
    .map((c) => ({
      datasets: (c.props('data') as { datasets: Dataset[] }).datasets,
      options: c.props('options') as {
        scales: { y: { ticks: { callback: (v: number) => string } } };
      },
    }));

describe('Performance by subgroup', () => {
  const w = mount(RunSubgroupForest, {
    props: { analyses: [sexAnalysis], overall, filename: 'run' },
    global: { plugins: [vuetify] },
  });

  it('lists every level with its figures and flags the one below the minimum events', () => {
    expect(sexAnalysis.levels.map((l) => [l.level, l.belowMinimum])).toEqual([
      ['female', false],
      ['male', false],
      ['unknown', true],
    ]);
    for (const l of sexAnalysis.levels) {
      const row = w.find(`[data-test="level-${l.level}"]`);
      expect(row.exists()).toBe(true);
      expect(row.find('[data-test="below-minimum"]').exists()).toBe(l.belowMinimum);
      expect(row.text()).toContain(formatFigure('auc', l.auc!.estimate));
    }
  });

  it("states Cochran's Q with its df and p for calibration-in-the-large and log O/E", () => {
    const text = w.find('[data-test="heterogeneity"]').text();
    for (const h of [sexAnalysis.heterogeneity.calibrationIntercept, sexAnalysis.heterogeneity.logOe]) {
      const r = h.result!;
      expect(r.df).toBe(2); // three levels
      expect(text).toContain(`Q = ${formatNumber(r.q, 2)} on 2 df, ${formatPValue(r.pValue)}`);
    }
    expect(text).toContain("Cochran's Q");
    expect(text).toContain('across female, male, unknown');
  });

  it('draws one forest plot per metric, the small level hollow and marked †, the whole cohort as the reference', () => {
    const charts = chartsOf(w);
    expect(charts).toHaveLength(4);
    const auc = charts[0];
    const byLabel = (l: string) => auc.datasets.find((d) => d.label.includes(l));
    expect(byLabel('Group')!.data.map((d) => d.y)).toEqual([0, 1]);
    expect(byLabel('Below the minimum')!.data.map((d) => d.y)).toEqual([2]);
    const unknown = sexAnalysis.levels[2].auc!;
    expect(byLabel('Below the minimum')!.data[0]).toEqual({
      x: unknown.estimate,
      y: 2,
      xMin: unknown.lower,
      xMax: unknown.upper,
    });
    expect(byLabel('Whole cohort')!.data.map((d) => d.x)).toEqual([overall.auc.estimate, overall.auc.estimate]);
    expect([0, 1, 2].map((i) => auc.options.scales.y.ticks.callback(i))).toEqual(['female', 'male', 'unknown †']);
  });
});

describe('the printed report', () => {
  it('shows the tables and sentences without the plots', () => {
    const w = mount(RunSubgroupForest, {
      props: { analyses: [sexAnalysis], overall, charts: false },
      global: { plugins: [vuetify] },
    });
    expect(chartsOf(w)).toHaveLength(0);
    expect(w.find('[data-test="heterogeneity"]').text()).toContain("Cochran's Q");
    expect(w.findAll('tbody tr')).toHaveLength(3);
    expect(w.text()).not.toContain('dashed line');
  });
});

describe('Performance by site', () => {
  const w = mount(RunSiteForest, {
    props: { sites, overall, filename: 'run' },
    global: { plugins: [vuetify] },
  });

  it('keeps the refused site with its reason and flags the small ones', () => {
    const outpost = sites.levels.find((l) => l.level === 'Outpost')!;
    expect(outpost.error).toBeTruthy();
    expect(w.find('[data-test="level-Outpost"] [data-test="level-error"]').text()).toContain(outpost.error!);
    expect(w.find('[data-test="level-Annex"] [data-test="below-minimum"]').exists()).toBe(true);
    expect(w.find('[data-test="level-North"] [data-test="below-minimum"]').exists()).toBe(false);
    const cautions = w.find('[data-test="site-cautions"]').text();
    expect(cautions).toContain('Annex');
    expect(cautions).not.toContain('fewer than 3 there is no prediction interval');
  });

  it('gives τ², I², Q and the prediction interval in words for each metric', () => {
    const text = w.find('[data-test="site-pooling"]').text();
    const r = sites.pooled.logitAuc.result!;
    expect(r.k).toBe(4); // North, South, East, Annex; Outpost left out
    expect(text).toContain(`τ² = ${formatNumber(r.tau2, 4)}, I² = ${formatNumber(r.i2, 1)}%`);
    expect(text).toContain(`pooled ${formatFigure('auc', r.natural.estimate)}`);
    expect(text).toContain(
      `95% prediction interval ${formatFigure('auc', r.natural.predictionLower)} to ${formatFigure('auc', r.natural.predictionUpper)}`,
    );
    expect(text).toContain('Left out: Outpost');
  });

  it('draws the pooled estimate as a diamond with its CI and a prediction interval row', () => {
    const auc = chartsOf(w)[0];
    const pooled = auc.datasets.find((d) => d.label.startsWith('Pooled'))!;
    const n = sites.levels.length;
    expect(pooled.pointStyle).toBe('rectRot');
    const nat = sites.pooled.logitAuc.result!.natural;
    expect(pooled.data).toEqual([{ x: nat.estimate, y: n, xMin: nat.lower, xMax: nat.upper }]);
    const pi = auc.datasets.find((d) => d.label === '95% prediction interval')!;
    expect([pi.data[0].xMin, pi.data[0].xMax]).toEqual([nat.predictionLower, nat.predictionUpper]);
    expect(auc.options.scales.y.ticks.callback(n)).toBe('Pooled ◆');
  });

  it("puts every site's own calibration curve on one plot, the refused site left out", () => {
    const curves = w.find('[data-test="subgroup-calibration"]');
    expect(curves.text()).toContain('Calibration by site');
    expect(curves.text()).toContain(`No curve for Outpost`);
    const drawn = curves.findComponent({ name: 'Scatter' }).props('data') as { datasets: Dataset[] };
    expect(drawn.datasets.map((d) => d.label.split(' ')[0])).toEqual([
      'Annex',
      'East',
      'North',
      'South',
      'Whole',
      'Ideal',
    ]);
  });

  it('with two sites warns that there is no prediction interval and draws none', () => {
    const two = {
      column: 'site',
      ...siteAnalysis(
        p,
        y,
        Array.from(site, (_, i) => (i % 2 ? 'North' : 'South')),
      ),
    };
    const w2 = mount(RunSiteForest, { props: { sites: two, overall }, global: { plugins: [vuetify] } });
    expect(w2.find('[data-test="site-cautions"]').text()).toContain('fewer than 3 there is no prediction interval');
    expect(w2.find('[data-test="site-pooled-table"]').text()).toContain('needs 3 or more sites');
    expect(chartsOf(w2)[0].datasets.some((d) => d.label === '95% prediction interval')).toBe(false);
  });
});
