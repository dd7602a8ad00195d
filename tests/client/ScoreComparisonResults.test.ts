// The score comparison's summary, fed the engine's own comparison (domain/comparisons/comparisonCompute.ts) of two
// invented supplied-risk scores on the same invented patients: the plain sentences, the summary table, and what the
// net-benefit difference and calibration charts are given to draw.
import { mount } from '@vue/test-utils';
import { describe, expect, it, vi } from 'vitest';
import { createVuetify } from 'vuetify';
import { aucComparisonSentence, netBenefitComparisonSentence } from '@shared/comparison';
import { formatEstimateShort, formatPValue } from '@shared/format';
import ScoreComparisonResults from '@/components/ScoreComparisonResults.vue';
import { comparisonOf } from './comparisonFixture';

// happy-dom has no canvas: the stub keeps what each chart hands chart.js, so the test can read it.
vi.mock('vue-chartjs', () => ({
  Scatter: { name: 'Scatter', props: ['data', 'options', 'plugins'], template: '<canvas />' },
}));

const vuetify = createVuetify();
interface Dataset {
  label: string;
  data: { x: number; y: number }[];
}
const chartsOf = (w: ReturnType<typeof mount>) =>
  w.findAllComponents({ name: 'Scatter' }).map((c) => (c.props('data') as { datasets: Dataset[] }).datasets);
const names = { first: 'Heron index v1', second: 'Plover score v1' };

describe('a score comparison with bootstrap replicates', () => {
  const c = comparisonOf(80);
  const r = c.results;
  const w = mount(ScoreComparisonResults, { props: { comparison: c }, global: { plugins: [vuetify] } });

  it('says which score has the higher AUC, by how much, with the paired CI and p-value', () => {
    expect(r.auc.difference.estimate).toBeGreaterThan(0);
    const sentence = aucComparisonSentence(names, r.auc.difference, r.auc.pValue);
    expect(sentence).toMatch(/^Heron index v1 has the higher AUC, by /);
    expect(w.find('[data-testid="comparison-sentences"]').text()).toContain(sentence);
  });

  it('gives the net-benefit difference with its bootstrap CI at the usual thresholds', () => {
    const text = w.find('[data-testid="comparison-sentences"]').text();
    for (const t of [0.05, 0.1, 0.2, 0.3]) {
      const row = r.netBenefit.find((x) => x.threshold === t)!;
      const s = netBenefitComparisonSentence(names, t, {
        estimate: row.difference.estimate,
        lower: row.difference.lower!,
        upper: row.difference.upper!,
      });
      expect(s).toContain('95% CI');
      expect(text).toContain(s);
    }
  });

  it("puts each score's own figures beside the paired AUC difference in the summary table", () => {
    const auc = w.findAll('[data-testid="comparison-summary"] tbody tr')[0].text();
    expect(auc).toContain(formatEstimateShort('auc', r.first.auc));
    expect(auc).toContain(formatEstimateShort('auc', r.second.auc));
    expect(auc).toContain(
      `${formatEstimateShort('auc', r.auc.difference)}; paired DeLong ${formatPValue(r.auc.pValue)}`,
    );
  });

  it('draws the net-benefit difference with its band, and both calibration curves on one plot', () => {
    const [nb, cal] = chartsOf(w);
    expect(nb[0].data.map((d) => d.y)).toEqual(r.netBenefit.map((x) => x.difference.estimate));
    expect(nb[1].data.map((d) => d.y)).toEqual(r.netBenefit.map((x) => x.difference.lower));
    expect(nb[2].data.map((d) => d.y)).toEqual(r.netBenefit.map((x) => x.difference.upper));
    expect(cal.map((d) => d.label)).toEqual([
      'Heron index v1: groups with 95% CI',
      'Heron index v1: loess',
      'Plover score v1: groups with 95% CI',
      'Plover score v1: loess',
      'Ideal (observed = predicted)',
    ]);
    expect(cal[3].data.map((d) => d.y)).toEqual(r.second.calibrationCurve.smoothed.observed);
  });
});

describe('a score comparison without bootstrap replicates', () => {
  const c = comparisonOf(0);
  const w = mount(ScoreComparisonResults, { props: { comparison: c }, global: { plugins: [vuetify] } });

  it('gives the net-benefit differences without intervals and draws no band', () => {
    expect(c.results.bootstrap).toBeNull();
    const text = w.find('[data-testid="comparison-sentences"]').text();
    expect(text).toContain('At a threshold of 10%');
    expect(text.split('At a threshold').slice(1).join('')).not.toContain('95% CI');
    const [nb] = chartsOf(w);
    expect(nb.map((d) => d.label)).toEqual(['Difference (first − second)', 'No difference']);
  });
});
