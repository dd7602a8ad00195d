// The overview's task cards lead somewhere for every role, and each role's menu starts with its most frequent task.
import { flushPromises, mount } from '@vue/test-utils';
import { createPinia, setActivePinia } from 'pinia';
import { describe, expect, it, vi } from 'vitest';
import { createRouter, createMemoryHistory } from 'vue-router';
import { createVuetify } from 'vuetify';
import { pageRoles } from '@shared/access';
import { ROLES, type Role } from '@shared/roles';
import { navigationFor } from '../../client/src/navigation';
import HomeView from '@/views/HomeView.vue';

vi.mock('@/api/drift', () => ({ listAlerts: async () => [] }));

async function overviewAs(role: Role) {
  // A signed-in session as the auth store keeps it (client/src/stores/auth.ts reads it when created).
  sessionStorage.setItem(
    'plumbline.session',
    JSON.stringify({
      token: 't',
      expiresAt: Date.now() + 600_000,
      user: { id: 'u1', email: `${role}@example.test`, name: 'Test Person', role, active: true },
    }),
  );
  const pinia = createPinia();
  setActivePinia(pinia);
  const router = createRouter({
    history: createMemoryHistory(),
    routes: [{ path: '/:any(.*)*', component: { template: '<div />' } }],
  });
  const w = mount(HomeView, { global: { plugins: [createVuetify(), pinia, router] } });
  await flushPromises();
  return w;
}

describe('the overview', () => {
  it.each(ROLES)('%s: every task card has a link to a page the role may open', async (role) => {
    const w = await overviewAs(role);
    const cards = w.findAll('[data-testid^="task-"]');
    expect(cards.length).toBeGreaterThan(1);
    const reachable = new Set(
      navigationFor(role)
        .map((n) => n.to)
        .concat(pageRoles('run-start').includes(role) ? ['/runs/new'] : []),
    );
    for (const card of cards) {
      const link = card.find('a[href]');
      expect(link.exists(), `${card.attributes('data-testid')} has a link`).toBe(true);
      expect(
        reachable.has(link.attributes('href')!),
        `${card.attributes('data-testid')} → ${link.attributes('href')}`,
      ).toBe(true);
    }
    w.unmount();
  });
});

describe('the menu', () => {
  it('starts with "Upload cohort" for the steward, and with the overview for the others', () => {
    expect(navigationFor('steward')[0].title).toBe('Upload cohort');
    for (const role of ROLES.filter((r) => r !== 'steward'))
      expect(navigationFor(role)[0].title, role).toBe('Overview');
  });
  it('offers the sign-off queue to exactly the roles its route admits (chair and admin)', () => {
    expect(ROLES.filter((r) => navigationFor(r).some((n) => n.to === '/signoff-queue'))).toEqual(['admin', 'chair']);
  });
});
