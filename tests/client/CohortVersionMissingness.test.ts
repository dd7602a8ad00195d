// The missing-values section of a cohort version's page, fed the summary the upload check makes of a small table
// counted by hand (tests/unit/services/missingness.test.ts has the same table): the sentence on who has gaps and their
// outcome rate, the combinations missing together, and what the charts by subgroup and by period are given to draw.
import { mount } from '@vue/test-utils';
import { describe, expect, it, vi } from 'vitest';
import { createVuetify } from 'vuetify';
import CohortVersionMissingness from '@/components/CohortVersionMissingness.vue';
import { MissingnessCounter } from '../../server/src/domain/cohorts/missingness';

// happy-dom has no canvas: the stubs keep what the section hands chart.js, so the test can read it.
vi.mock('vue-chartjs', () => ({
  Bar: { name: 'Bar', props: ['data', 'options'], template: '<canvas />' },
  Line: { name: 'Line', props: ['data', 'options'], template: '<canvas />' },
}));

const vuetify = createVuetify();

/** Rows 1–8: gaps, unit, period, outcome. */
const TABLE: [string, string | null, string | null, number][] = [
  ['a', 'X', '2025-Q1', 1],
  ['ab', 'X', '2025-Q1', 0],
  ['', 'Y', '2025-Q1', 0],
  ['', null, '2025-Q2', 1],
  ['ac', 'Y', '2025-Q2', 1],
  ['a', 'X', '2025-Q2', 0],
  ['', 'Y', null, 0],
  ['ab', 'Y', '2025-Q1', 1],
];
function summary(table = TABLE) {
  const counter = new MissingnessCounter({
    predictors: ['a', 'b', 'c', 'd'],
    gapsAllowed: ['a', 'b', 'c'],
    subgroups: ['unit'],
    period: 'period (period)',
  });
  for (const [gaps, unit, period, y] of table)
    counter.add(
      ['a', 'b', 'c', 'd'].map((c) => (gaps.includes(c) ? 1 : 0)),
      [unit],
      period,
      y,
    );
  return counter.summary();
}

interface Drawn {
  labels: string[];
  datasets: { label: string; data: (number | null)[] }[];
}
const drawn = (w: ReturnType<typeof mount>, name: 'Bar' | 'Line') =>
  w.findAllComponents({ name }).map((c) => c.props('data') as Drawn);
const mountWith = (missingness: ReturnType<typeof summary> | null) =>
  mount(CohortVersionMissingness, {
    props: {
      missingness,
      columnSummary: {
        age: { kind: 'numeric', n: 95, missing: 5, min: 20, max: 90, mean: 60, histogram: [], histogramSampled: false },
        unit: { kind: 'categorical', n: 100, missing: 0, levels: [], otherLevels: 0 },
      },
    },
    global: { plugins: [vuetify] },
  });

describe('the missing-values section', () => {
  const w = mountWith(summary());

  it('says how many patients have a gap and their outcome rate beside the others', () => {
    // Rows 1, 2, 5, 6, 8 have a gap; events in 1, 5, 8 (3 of 5) against row 4 of 3, 4, 7 (1 of 3).
    expect(w.find('[data-test="missingness-summary"]').text()).toMatch(
      /5 of 8 patients \(62\.5%\) miss at least one predictor\. Their outcome rate is 60\.0%, against 33\.3%/,
    );
    expect(w.find('[data-test="missingness-allowed"]').text()).toContain('a, b, c');
  });

  it('lists the combinations missing together, with only the predictors that have gaps as columns', () => {
    const table = w.find('[data-test="missingness-patterns"]');
    expect(table.findAll('thead th').map((t) => t.text())).toEqual(['a', 'b', 'c', 'Patients (share)', 'Outcome rate']);
    const cells = (label: string) =>
      table
        .find(`[data-test="pattern-${label}"]`)
        .findAll('td')
        .map((t) => t.text());
    expect(cells('none missing')).toEqual(['recorded', 'recorded', 'recorded', '3 (37.5%)', '33.3%']);
    expect(cells('a')).toEqual(['missing', 'recorded', 'recorded', '2 (25.0%)', '50.0%']);
    expect(cells('a + b')).toEqual(['missing', 'missing', 'recorded', '2 (25.0%)', '50.0%']);
    expect(cells('a + c')).toEqual(['missing', 'recorded', 'missing', '1 (12.5%)', '100.0%']);
  });

  it('draws the share missing per column, per unit level and per period', () => {
    const [columns, byUnit] = drawn(w, 'Bar');
    expect(columns.labels).toEqual(['a', 'b', 'c', 'd', 'unit', 'period (period)']);
    expect(columns.datasets[0].data).toEqual([62.5, 25, 12.5, 0, 12.5, 12.5]);
    // Y: rows 3, 5, 7, 8; X: rows 1, 2, 6; not recorded: row 4.
    expect(byUnit.labels).toEqual(['Y', 'X', '(not recorded)']);
    expect(byUnit.datasets.map((d) => [d.label, d.data])).toEqual([
      ['a', [50, 100, 0]],
      ['b', [25, 100 * (1 / 3), 0]],
      ['c', [25, 0, 0]],
    ]);
    const [byPeriod] = drawn(w, 'Line');
    expect(byPeriod.labels).toEqual(['2025-Q1', '2025-Q2', '(no period)']);
    expect(byPeriod.datasets.find((d) => d.label === 'a')!.data).toEqual([75, 100 * (2 / 3), 0]);
  });

  it('without any gap says so and draws no chart by subgroup or period', () => {
    const none = mountWith(summary(TABLE.map(([, unit, period, y]) => ['', unit, period, y])));
    expect(none.find('[data-test="missingness-summary"]').text()).toBe(
      'No predictor value is missing in this version.',
    );
    expect(none.find('[data-test="missingness-patterns"]').exists()).toBe(false);
    expect(drawn(none, 'Bar')).toHaveLength(1);
    expect(drawn(none, 'Line')).toHaveLength(0);
  });

  it('for a version stored before, shows the empty cells per column from its column summary', () => {
    const old = mountWith(null);
    expect(old.find('[data-test="missingness-older"]').exists()).toBe(true);
    const rows = old.findAll('tbody tr').map((r) => r.findAll('td').map((t) => t.text()));
    expect(rows).toEqual([
      ['age', '5', '5.0%'],
      ['unit', '0', '0.0%'],
    ]);
  });
});
