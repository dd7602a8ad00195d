// "Is the cohort big enough?" as laid out for a run or cohort version: the shared verdict's words, each count against
// 100 (Vergouwe et al. 2005) and 200 (Collins et al. 2016), the expected widths, where the AUC came from, and a planner
// link carrying the event rate and AUC. The verdict itself is tested in tests/unit/shared/adequacy.test.ts.
import { mount } from '@vue/test-utils';
import { describe, expect, it } from 'vitest';
import { createRouter, createMemoryHistory } from 'vue-router';
import { createVuetify } from 'vuetify';
import { adequacyVerdict, PRECISION_ASSUMPTION, type CohortAdequacy } from '@shared/adequacy';
import CohortAdequacyPanel from '@/components/CohortAdequacyPanel.vue';

const vuetify = createVuetify();

function adequacy(events: number, nonEvents: number, over: Partial<CohortAdequacy> = {}): CohortAdequacy {
  const n = events + nonEvents;
  return {
    n,
    events,
    nonEvents,
    eventRate: events / n,
    verdict: adequacyVerdict(events, nonEvents),
    auc: { value: 0.71, source: 'this run', runId: null },
    precision: { oe: 0.25, auc: 0.081, slope: 0.62, note: null },
    assumption: PRECISION_ASSUMPTION,
    ...over,
  };
}

async function mountPanel(a: CohortAdequacy, subject: 'run' | 'cohort') {
  const router = createRouter({
    history: createMemoryHistory(),
    routes: [
      { path: '/', component: { template: '<div />' } },
      { path: '/sample-size', name: 'sample-size', component: { template: '<div />' } },
    ],
  });
  await router.push('/');
  return mount(CohortAdequacyPanel, { props: { adequacy: a, subject }, global: { plugins: [vuetify, router] } });
}

describe('CohortAdequacyPanel', () => {
  it('a run below the minimum: says so, marks the short count, and gives the widths', async () => {
    const w = await mountPanel(adequacy(60, 900), 'run');
    expect(w.find('[data-test="adequacy-verdict"]').text()).toBe('Below the minimum');
    expect(w.find('[data-test="adequacy-message"]').text()).toMatch(/40 more events needed/);
    const counts = w.findAll('tbody')[0].findAll('tr');
    expect(counts[0].text()).toMatch(/Events\s*60\s*40 short\s*140 short/);
    expect(counts[1].text()).toMatch(/Non-events\s*900\s*met\s*met/);
    const widths = w.findAll('tbody')[1].text();
    expect(widths).toContain('0.25');
    expect(widths).toContain('0.62');
    expect(widths).toContain('0.081');
    expect(w.find('[data-test="adequacy-auc"]').text()).toMatch(/AUC 0\.710, the AUC of this run/);
    const link = w.find('a[href^="/sample-size"]');
    expect(link.attributes('href')).toBe('/sample-size?eventRate=0.0625&auc=0.710');
  });

  it('a cohort version with an assumed AUC says that it is assumed', async () => {
    const w = await mountPanel(adequacy(250, 2000, { auc: { value: 0.75, source: 'assumed', runId: null } }), 'cohort');
    expect(w.find('[data-test="adequacy-verdict"]').text()).toBe('Preferred size met');
    expect(w.find('[data-test="adequacy-auc"]').text()).toMatch(
      /an assumed AUC: no completed run of this score gives one yet/,
    );
    expect(w.text()).toContain('In this cohort version');
  });

  it('missing widths show a dash and the reason', async () => {
    const w = await mountPanel(
      adequacy(150, 150, {
        precision: { oe: 0.4, auc: 0.1, slope: null, note: 'the calibration slope width needs an AUC above 0.5' },
      }),
      'run',
    );
    expect(w.find('[data-test="adequacy-verdict"]').text()).toBe('Minimum met');
    expect(w.findAll('tbody')[1].findAll('tr')[1].text()).toMatch(/Calibration slope\s*—/);
    expect(w.find('[data-test="adequacy-auc"]').text()).toMatch(/needs an AUC above 0\.5/);
  });
});
