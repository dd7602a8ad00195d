// A comparison's page follows its job: a named progress bar while it waits and computes (each read asks the server to
// answer when it ends), then the results; a failed one shows its reason instead of results.
import { flushPromises, mount } from '@vue/test-utils';
import { createPinia, setActivePinia } from 'pinia';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { createRouter, createMemoryHistory } from 'vue-router';
import { createVuetify } from 'vuetify';
import type { ScoreComparisonDetail } from '@shared/scoreComparison';
import ScoreComparisonView from '@/views/ScoreComparisonView.vue';
import { comparisonOf } from './comparisonFixture';

vi.mock('vue-chartjs', () => ({
  Scatter: { name: 'Scatter', props: ['data', 'options', 'plugins'], template: '<canvas />' },
}));

const done = comparisonOf(0);
const waiting = (status: 'queued' | 'running', progress: number): ScoreComparisonDetail => ({
  ...done,
  status,
  progress,
  results: null,
  headline: null,
  engineVersion: null,
  inputsSha256: null,
  resultsSha256: null,
  completedAt: null,
});

/** Each read answers with the next state; the test releases the reads one by one. */
let answers: ScoreComparisonDetail[] = [];
const reads: { waitSeconds: number; release: () => void }[] = [];
const getComparison = vi.fn(
  (_id: string, _signal?: AbortSignal, waitSeconds = 0) =>
    new Promise<ScoreComparisonDetail>((resolve) => {
      const next = answers.shift()!;
      reads.push({ waitSeconds, release: () => resolve(next) });
    }),
);
vi.mock('@/api/comparisons', () => ({
  getComparison: (id: string, signal?: AbortSignal, waitSeconds?: number) => getComparison(id, signal, waitSeconds),
  reproduceComparison: vi.fn(),
}));

let wrapper: ReturnType<typeof mount> | null = null;
afterEach(() => {
  wrapper?.unmount();
  wrapper = null;
  reads.length = 0;
  getComparison.mockClear();
});

async function mountAt(id: string) {
  const pinia = createPinia();
  setActivePinia(pinia);
  const router = createRouter({
    history: createMemoryHistory(),
    routes: [
      { path: '/comparisons', name: 'comparisons', component: { template: '<div />' } },
      { path: '/comparisons/:id', name: 'comparison', component: ScoreComparisonView },
    ],
  });
  await router.push(`/comparisons/${id}`);
  wrapper = mount(ScoreComparisonView, { global: { plugins: [createVuetify(), pinia, router] } });
  await flushPromises();
}
const release = async () => {
  reads[reads.length - 1].release();
  await flushPromises();
};
const bar = () => wrapper!.find('[aria-label="Computing the comparison…"]');

describe('ScoreComparisonView', () => {
  it('shows the named progress bar while the job waits and computes, then the results', async () => {
    answers = [waiting('queued', 0), waiting('running', 0.4), done];
    await mountAt(done.id);
    await release();
    expect(bar().exists()).toBe(true);
    expect(wrapper!.text()).toContain('Computing the comparison… waiting for a free worker');
    expect(wrapper!.find('[data-testid="comparison-sentences"]').exists()).toBe(false);
    await release();
    expect(bar().exists()).toBe(true);
    expect(wrapper!.text()).toContain('Computing the comparison… 40% done');
    await release();
    expect(bar().exists()).toBe(false);
    expect(wrapper!.find('[data-testid="comparison-sentences"]').exists()).toBe(true);
    // The first read answers at once; the ones that follow a waiting comparison wait for its end on the server.
    expect(reads.map((r) => r.waitSeconds)).toEqual([0, 2, 2]);
  });

  it('shows why a comparison failed, and no results', async () => {
    answers = [{ ...waiting('running', 0.3), status: 'failed', progress: 1, error: 'the outcome has no events' }];
    await mountAt(done.id);
    await release();
    expect(bar().exists()).toBe(false);
    expect(wrapper!.text()).toContain('This comparison failed');
    expect(wrapper!.text()).toContain('the outcome has no events');
    expect(wrapper!.find('[data-testid="comparison-sentences"]').exists()).toBe(false);
    expect(reads).toHaveLength(1);
  });
});
