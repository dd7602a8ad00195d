// The run page's tables: too-small subgroups are flagged instead of judged; the CSV download carries the numbers.
import { mount } from '@vue/test-utils';
import { describe, expect, it } from 'vitest';
import { createVuetify } from 'vuetify';
import RunSubgroupTable from '@/components/RunSubgroupTable.vue';
import { toCsv } from '../../client/src/plugins/charts';

const vuetify = createVuetify();

const est = (estimate: number) => ({ estimate, lower: estimate - 0.05, upper: estimate + 0.05 });

describe('RunSubgroupTable', () => {
  it('shows figures for a judged group and a flag for a too-small one', () => {
    const w = mount(RunSubgroupTable, {
      props: {
        minEvents: 10,
        periods: [],
        subgroups: [
          {
            column: 'unit',
            level: 'Birch',
            n: 400,
            events: 60,
            tooSmall: false,
            result: {
              eventRate: 0.15,
              auc: est(0.7),
              calibrationIntercept: est(0.1),
              calibrationSlope: est(0.95),
              oe: est(1.1),
              brier: 0.12,
              ici: 0.01,
              warnings: [],
            },
          },
          { column: 'unit', level: 'Small', n: 9, events: 2, tooSmall: true },
        ],
      },
      global: { plugins: [vuetify] },
    });
    const rows = w.findAll('tbody tr');
    expect(rows).toHaveLength(2);
    expect(rows[0].text()).toContain('0.700 (0.650 to 0.750)');
    expect(rows[0].text()).not.toContain('too small');
    expect(rows[1].text()).toContain('too small to judge');
    expect(rows[1].text()).not.toContain('0.700');
    expect(w.text()).toContain('fewer than 10 events');
  });

  it('writes each figure with the decimals it has on every page, and counts with thousands separators', () => {
    const w = mount(RunSubgroupTable, {
      props: {
        minEvents: 10,
        periods: [],
        subgroups: [
          {
            column: 'site',
            level: 'North',
            n: 12000,
            events: 1500,
            tooSmall: false,
            result: {
              eventRate: 0.125,
              auc: est(0.7),
              calibrationIntercept: est(-0.02),
              calibrationSlope: est(0.95),
              oe: est(1.1),
              brier: 0.12,
              ici: 0.01,
              warnings: [],
            },
          },
        ],
      },
      global: { plugins: [vuetify] },
    });
    const text = w.find('tbody tr').text();
    expect(text).toContain('12,000');
    expect(text).toContain('1,500');
    expect(text).toContain('1.10 (1.05 to 1.15)'); // O/E: two decimals (shared/src/format.ts)
    expect(text).toContain('-0.020 (-0.070 to 0.030)'); // calibration-in-the-large: three
  });
});

describe('toCsv (the CSV download of every chart and table)', () => {
  it('quotes cells with commas or quotes, doubles quotes, leaves missing values empty (RFC 4180)', () => {
    expect(
      toCsv(
        ['level', 'n'],
        [
          ['Birch, main', 4],
          ['say "hi"', null],
          ['Cedar', 0.125],
        ],
      ),
    ).toBe('level,n\r\n"Birch, main",4\r\n"say ""hi""",\r\nCedar,0.125\r\n');
  });
  it('neutralises formula-looking text (a subgroup level or a label from a file) but keeps negative numbers', () => {
    expect(
      toCsv(
        ['level', 'n'],
        [
          ['=HYPERLINK("http://x.invalid")', -2],
          [' @SUM(A1)', 1],
          ['-1+2', '-0.5'],
        ],
      ),
    ).toBe(`level,n\r\n"'=HYPERLINK(""http://x.invalid"")",-2\r\n' @SUM(A1),1\r\n'-1+2,-0.5\r\n`);
  });
});
