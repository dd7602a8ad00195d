// The sample-size planner page: every input reaches the API, and the answer lists each criterion's patients and events
// with the largest marked. The API is replaced by the engine's own planner (server/src/stats/sampleSize.ts), so the
// page is shown real numbers; the numbers themselves are checked in tests/unit/stats/sampleSizeCriteria.test.ts.
import { flushPromises, mount } from '@vue/test-utils';
import { describe, expect, it, vi } from 'vitest';
import { createRouter, createMemoryHistory } from 'vue-router';
import { createVuetify } from 'vuetify';
import type { SampleSizeQuery } from '@shared/drift';
import { formatCount } from '@shared/format';
import { planSampleSize as enginePlan } from '../../server/src/stats/sampleSize';

const calls: SampleSizeQuery[] = [];
// a stored run's predicted risks, as the server would read them for lpDistribution 'cohort' (invented)
const RUN_RISKS = Float64Array.from({ length: 400 }, (_, i) => 0.02 + (0.5 * i) / 400);
vi.mock('@/api/drift', () => ({
  planSampleSize: vi.fn(async (q: SampleSizeQuery) => {
    calls.push(q);
    return enginePlan({ ...q, risks: q.lpDistribution === 'cohort' ? RUN_RISKS : undefined });
  }),
}));
vi.mock('@/api/runs', () => ({
  listRuns: vi.fn(async () => ({
    total: 1,
    runs: [
      {
        id: '6f1c2b7e-4a0d-4c4e-9a51-2f6d0c8b9e11',
        scoreName: 'Kestrel fixture score',
        scoreVersion: 2,
        cohortName: 'Wards A–C',
        cohortVersion: 1,
        cohortLabel: '2026 Q1',
      },
    ],
  })),
}));

import SampleSizePlannerView from '@/views/SampleSizePlannerView.vue';

const vuetify = createVuetify();

async function mountPage() {
  const router = createRouter({
    history: createMemoryHistory(),
    routes: [{ path: '/sample-size', name: 'sample-size', component: SampleSizePlannerView }],
  });
  await router.push('/sample-size?eventRate=0.1&auc=0.75');
  return mount(SampleSizePlannerView, { global: { plugins: [vuetify, router] }, attachTo: document.body });
}

/** The input whose label reads `label` (Vuetify ties them by id). */
function field(w: Awaited<ReturnType<typeof mountPage>>, label: string) {
  const l = w.findAll('label').find((x) => x.text() === label && x.attributes('for'));
  if (!l) throw new Error(`no field labelled ${label}`);
  return w.find(`input#${l.attributes('for')}`);
}

describe('SampleSizePlannerView', () => {
  it('sends the net-benefit, anticipated and beta inputs and shows every criterion with the largest marked', async () => {
    const w = await mountPage();
    await flushPromises(); // eventRate and AUC in the address compute at once
    calls.length = 0;
    await field(w, '95% CI width for standardised net benefit').setValue('0.2');
    await field(w, 'Risk threshold').setValue('0.1');
    await field(w, 'Anticipated sensitivity at the threshold').setValue('0.75');
    await field(w, 'Anticipated specificity at the threshold').setValue('0.7');
    await field(w, 'Anticipated O/E').setValue('1.1');
    await field(w, 'Anticipated calibration slope').setValue('0.9');
    const select = w.findAllComponents({ name: 'VSelect' })[0];
    select.vm.$emit('update:modelValue', 'beta');
    await flushPromises();
    await field(w, 'Beta shape a (risk scale)').setValue('1');
    await field(w, 'Beta shape b (risk scale)').setValue('9');
    await w.find('form').trigger('submit');
    await flushPromises();

    expect(calls).toHaveLength(1);
    expect(calls[0]).toMatchObject({
      eventRate: 0.1,
      auc: 0.75,
      ciWidthNb: 0.2,
      threshold: 0.1,
      sensitivity: 0.75,
      specificity: 0.7,
      anticipatedOE: 1.1,
      anticipatedSlope: 0.9,
      lpDistribution: 'beta',
      betaA: 1,
      betaB: 9,
    });
    const plan = enginePlan(calls[0]);
    const rows = w.findAll('tbody tr');
    // the form's default widths for O/E, AUC and slope stay set, so all four criteria are asked for
    expect(rows.map((r) => r.find('td').text())).toEqual([
      'O/E',
      'AUC (c-statistic)',
      'Calibration slope',
      'Standardised net benefit',
    ]);
    for (const [i, c] of plan.criteria.entries()) {
      expect(rows[i].text()).toContain(formatCount(c.n));
      expect(rows[i].text()).toContain(formatCount(c.events));
    }
    const marked = rows.filter((r) => r.find('[data-test="largest"]').exists());
    expect(marked).toHaveLength(1);
    expect(marked[0].find('td').text()).toBe(label(plan.largest!.criterion));
    expect(w.find('[data-testid="sample-size-largest"]').text()).toContain(formatCount(plan.largest!.n));
    expect(w.find('[data-test="lp-distribution"]').text()).toMatch(/Beta\(a 1\.000, b 9\.000\)/);
    w.unmount();
  });
});

describe('SampleSizePlannerView with a stored cohort', () => {
  it("offers completed runs and sends the chosen run for the cohort's predicted risks", async () => {
    const w = await mountPage();
    await flushPromises();
    calls.length = 0;
    w.findAllComponents({ name: 'VSelect' })[0].vm.$emit('update:modelValue', 'cohort');
    await flushPromises();
    const runSelect = w.findAllComponents({ name: 'VSelect' })[1];
    expect(runSelect.props('items')).toEqual([
      { value: '6f1c2b7e-4a0d-4c4e-9a51-2f6d0c8b9e11', title: 'Kestrel fixture score v2 on Wards A–C v1 (2026 Q1)' },
    ]);
    runSelect.vm.$emit('update:modelValue', '6f1c2b7e-4a0d-4c4e-9a51-2f6d0c8b9e11');
    await flushPromises();
    await w.find('form').trigger('submit');
    await flushPromises();
    expect(calls[0]).toMatchObject({ lpDistribution: 'cohort', runId: '6f1c2b7e-4a0d-4c4e-9a51-2f6d0c8b9e11' });
    expect(w.find('[data-test="lp-distribution"]').text()).toMatch(/the predicted risks of 400 patients/);
    w.unmount();
  });
});

function label(c: string) {
  return { oe: 'O/E', auc: 'AUC (c-statistic)', slope: 'Calibration slope', netBenefit: 'Standardised net benefit' }[c];
}
