// The CUSUM on 20,000 patients stays readable: each period's patients are found on the axis, signals are counted per
// period, and one period can be shown alone.
import { mount } from '@vue/test-utils';
import { describe, expect, it, vi } from 'vitest';
import { createVuetify } from 'vuetify';
import DriftCusumChart from '@/components/DriftCusumChart.vue';
import { cusumPeriodSpans } from '../../client/src/charts/cusumPeriods';

// happy-dom has no canvas: the chart itself is tested in Chromium; here only what the component works out.
vi.mock('vue-chartjs', () => ({ Line: { name: 'Line', template: '<canvas />' } }));

const vuetify = createVuetify();
const QUARTERS = ['2025-01-01', '2025-04-01', '2025-07-01', '2025-10-01'];

/** 20,000 patients, 5,000 a quarter, dated within their quarter; signals at chosen indices. */
function cusum(signalAt: number[], improvementAt: number[] = []) {
  const points = Array.from({ length: 20_000 }, (_, i) => ({
    index: i + 1,
    date: QUARTERS[Math.floor(i / 5000)].replace(/-01$/, `-${String(1 + (i % 28)).padStart(2, '0')}`),
    value: (i % 50) / 10,
  }));
  const at = (i: number) => ({ index: i, date: points[i - 1].date });
  return {
    oddsRatio: 2,
    h: 4.5,
    points,
    signals: signalAt.map(at),
    improvement: { oddsRatio: 0.5, points, signals: improvementAt.map(at) },
  };
}
const periods = QUARTERS.map((d, q) => ({ label: `2025-Q${q + 1}`, periodStart: d, n: 5000 }));

describe('cusumPeriodSpans', () => {
  it('finds where each period begins on the patient axis and groups the signals by period', () => {
    const c = cusum([12, 4999, 5001, 17_500], [10_001]);
    // Given out of order, as a timeline can list them: the spans come back in date order.
    const spans = cusumPeriodSpans([...periods].reverse(), c.points, {
      deterioration: c.signals,
      improvement: c.improvement.signals,
    });
    expect(spans.map((s) => [s.label, s.from, s.to])).toEqual([
      ['2025-Q1', 1, 5000],
      ['2025-Q2', 5001, 10_000],
      ['2025-Q3', 10_001, 15_000],
      ['2025-Q4', 15_001, 20_000],
    ]);
    expect(spans.map((s) => s.deterioration.length)).toEqual([2, 1, 0, 1]);
    expect(spans.map((s) => s.improvement.length)).toEqual([0, 0, 1, 0]);
  });
  it('lays undated periods end to end by their patient counts', () => {
    const c = cusum([]);
    const spans = cusumPeriodSpans(
      periods.map((p) => ({ ...p, periodStart: null })),
      c.points,
      { deterioration: [], improvement: [] },
    );
    expect(spans.map((s) => s.from)).toEqual([1, 5001, 10_001, 15_001]);
  });
});

describe('DriftCusumChart', () => {
  it('lists each period with its signal count, and a click shows that period alone', async () => {
    const w = mount(DriftCusumChart, {
      props: { cusum: cusum([12, 4999, 17_500]), periods, filename: 'cusum' },
      global: { plugins: [vuetify], stubs: { ChartPanel: { template: '<div><slot /></div>' } } },
    });
    const table = w.find('[data-test="cusum-periods"]');
    expect(table.exists()).toBe(true);
    expect(w.find('[data-test="cusum-signals-2025-Q1"]').text()).toBe('2');
    expect(w.find('[data-test="cusum-signals-2025-Q4"]').text()).toBe('1');
    await w.findAll('tbody a').at(3)!.trigger('click');
    const options = (
      w.vm as unknown as { $: { setupState: { options: { scales: { x: { min: number; max: number } } } } } }
    ).$.setupState.options;
    expect([options.scales.x.min, options.scales.x.max]).toEqual([15_001, 20_000]);
  });
});
