// The run page's tables: too-small subgroups are flagged instead of judged; the CSV download carries the numbers.
import { mount } from '@vue/test-utils';
import { describe, expect, it, vi } from 'vitest';
import { createVuetify } from 'vuetify';
import ChartExportMenu from '@/components/ChartExportMenu.vue';
import RunSubgroupTable from '@/components/RunSubgroupTable.vue';

const vuetify = createVuetify();
globalThis.ResizeObserver ??= class {
  observe() {}
  unobserve() {}
  disconnect() {}
} as unknown as typeof ResizeObserver;

const est = (estimate: number) => ({ estimate, lower: estimate - 0.05, upper: estimate + 0.05 });

describe('RunSubgroupTable', () => {
  it('shows figures for a judged group and a flag for a too-small one', () => {
    const w = mount(RunSubgroupTable, {
      props: {
        minEvents: 10,
        periods: [],
        subgroups: [
          { column: 'unit', level: 'Birch', n: 400, events: 60, tooSmall: false, result: { eventRate: 0.15, auc: est(0.7), calibrationIntercept: est(0.1), calibrationSlope: est(0.95), oe: est(1.1), brier: 0.12, ici: 0.01, warnings: [] } },
          { column: 'unit', level: 'Small', n: 9, events: 2, tooSmall: true },
        ],
      },
      global: { plugins: [vuetify] },
    });
    const rows = w.findAll('tbody tr');
    expect(rows).toHaveLength(2);
    expect(rows[0].text()).toContain('0.700 (0.650–0.750)');
    expect(rows[0].text()).not.toContain('too small');
    expect(rows[1].text()).toContain('too small to judge');
    expect(rows[1].text()).not.toContain('0.700');
    expect(w.text()).toContain('fewer than 10 events');
  });
});

describe('ChartExportMenu', () => {
  it('writes a CSV with quoted cells where needed', async () => {
    let blob: Blob | undefined;
    const create = vi.spyOn(URL, 'createObjectURL').mockImplementation((b) => {
      blob = b as Blob;
      return 'blob:test';
    });
    vi.spyOn(URL, 'revokeObjectURL').mockImplementation(() => {});
    const w = mount(ChartExportMenu, {
      props: { filename: 'x', columns: ['level', 'n'], rows: [['Birch, main', 4], ['say "hi"', null]] },
      global: { plugins: [vuetify] },
      attachTo: document.body,
    });
    await w.find('button').trigger('click');
    await new Promise((r) => setTimeout(r, 50));
    const item = [...document.querySelectorAll('.v-list-item')].find((el) => el.textContent?.includes('CSV')) as HTMLElement;
    expect(item).toBeTruthy();
    item.click();
    expect(create).toHaveBeenCalled();
    expect(await blob!.text()).toBe('level,n\r\n"Birch, main",4\r\n"say ""hi""",\r\n');
    w.unmount();
  });
});
