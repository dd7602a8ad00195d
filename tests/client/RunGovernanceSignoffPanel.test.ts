// The chair's signing dialog: approving against a negative review asks for the reason (and warns) before it sends.
import { flushPromises, mount } from '@vue/test-utils';
import { createPinia, setActivePinia } from 'pinia';
import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';
import { createVuetify } from 'vuetify';
import type { RunGovernanceView, Verdict } from '@shared/governance';
import RunGovernanceSignoffPanel from '@/components/RunGovernanceSignoffPanel.vue';

const signoffRun = vi.fn(async () => ({}));
vi.mock('@/api/governance', () => ({
  signoffRun: (...args: unknown[]) => signoffRun(...(args as [])),
  revokeApproval: vi.fn(),
}));

globalThis.ResizeObserver ??= class {
  observe() {}
  unobserve() {}
  disconnect() {}
} as unknown as typeof ResizeObserver;

const governance = (verdict: Verdict): RunGovernanceView => ({
  runId: 'run-1',
  runStatus: 'completed',
  scoreVersionId: 'sv-1',
  clinicalStatus: 'not approved',
  approvedRunId: null,
  approval: null,
  reviews: [
    {
      id: 'rv-1',
      runId: 'run-1',
      verdict,
      reasoning: 'r',
      reviewerId: 'u-2',
      reviewerName: 'A Statistician',
      createdAt: '2026-01-01T00:00:00Z',
      supersededBy: null,
      current: true,
      decision: null,
      closedBy: null,
    },
  ],
  signatures: [],
  can: { review: false, sign: true, revoke: false, comment: true },
  reasonCannotSign: null,
});

let wrapper: ReturnType<typeof mount> | null = null;
const body = () => document.body;
const button = (text: string) =>
  [...body().querySelectorAll('button')].find((b) => b.textContent?.trim() === text) as HTMLButtonElement | undefined;

async function openApprove(verdict: Verdict) {
  // Signed in as a chair, the way the auth store finds a session (client/src/stores/auth.ts).
  const user = { id: 'u-1', email: 'chair@example.test', name: 'A Chair', role: 'chair', active: true };
  sessionStorage.setItem('plumbline.session', JSON.stringify({ token: 't', expiresAt: Date.now() + 60_000, user }));
  setActivePinia(createPinia());
  // The dialog drawn in place (Vuetify's overlay needs a visual viewport that happy-dom lacks); its content is the same.
  const VDialog = { props: ['modelValue'], template: '<div v-if="modelValue"><slot /></div>' };
  wrapper = mount(RunGovernanceSignoffPanel, {
    props: { governance: governance(verdict) },
    global: { plugins: [createVuetify()], stubs: { VDialog } },
    attachTo: document.body,
  });
  button('Approve for clinical use')!.click();
  await flushPromises();
}

async function type(selector: string, value: string) {
  const el = body().querySelector(selector) as HTMLInputElement | HTMLTextAreaElement;
  el.value = value;
  el.dispatchEvent(new Event('input'));
  await flushPromises();
}

beforeEach(() => signoffRun.mockClear());
afterEach(() => {
  wrapper?.unmount();
  wrapper = null;
  document.body.innerHTML = '';
});

describe('RunGovernanceSignoffPanel', () => {
  it.each(['not fit for use', 'recalibrate first'] as const)(
    'review "%s": warns and needs the reason before signing',
    async (verdict) => {
      await openApprove(verdict);
      expect(body().querySelector('[data-test="against-review-warning"]')?.textContent).toContain(
        `review says "${verdict}"`,
      );
      expect(body().querySelector('[data-test="signature-reason"] textarea')).not.toBeNull();
      await type('input[type="password"]', 'the-password');
      expect(button('Sign')!.disabled).toBe(true);
      await type('[data-test="signature-reason"] textarea', 'A pilot on one ward with monthly checks.');
      expect(button('Sign')!.disabled).toBe(false);
      button('Sign')!.click();
      await flushPromises();
      expect(signoffRun).toHaveBeenCalledWith('run-1', {
        decision: 'approve',
        password: 'the-password',
        reason: 'A pilot on one ward with monthly checks.',
      });
    },
  );

  it('names the approved run of the score version instead of a bare "approved"', async () => {
    setActivePinia(createPinia());
    const approved: RunGovernanceView = {
      ...governance('fit for use'),
      clinicalStatus: 'approved',
      approvedRunId: 'run-7',
      approval: { runId: 'run-7', runNumber: 3, cohortLabel: '2026-Q1', signedAt: '2026-04-20T09:30:00.000Z' },
    };
    const RouterLink = { props: ['to'], template: '<a :data-to="JSON.stringify(to)"><slot /></a>' };
    wrapper = mount(RunGovernanceSignoffPanel, {
      props: { governance: approved },
      global: { plugins: [createVuetify()], stubs: { RouterLink } },
      attachTo: document.body,
    });
    const status = body().querySelector('.run-signoff-panel p')!.textContent!.replace(/\s+/g, ' ');
    expect(status).toContain('Score version status: approved — run #3 on 2026-Q1, signed 2026-04-20 (not this run)');
    expect(body().querySelector('[data-test="approved-run"]')!.getAttribute('data-to')).toContain('run-7');
    await wrapper.setProps({ governance: { ...approved, runId: 'run-7' } });
    expect(body().querySelector('.run-signoff-panel p')!.textContent!.replace(/\s+/g, ' ')).toContain(
      'approved — run #3 on 2026-Q1, signed 2026-04-20 (this run)',
    );
  });

  it('review "fit for use": no warning and no reason asked', async () => {
    await openApprove('fit for use');
    expect(body().querySelector('[data-test="signature-dialog"]')).not.toBeNull();
    expect(body().querySelector('[data-test="against-review-warning"]')).toBeNull();
    expect(body().querySelector('[data-test="signature-reason"]')).toBeNull();
    await type('input[type="password"]', 'the-password');
    expect(button('Sign')!.disabled).toBe(false);
  });
});
