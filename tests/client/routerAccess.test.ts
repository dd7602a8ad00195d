// The client's router guard and menu take who may open each page from shared/src/access.ts: every route has a rule
// there, and signing in as each role and opening each page lands on the page or on "Not allowed" as that rule says.
import { createPinia, setActivePinia } from 'pinia';
import { describe, expect, it } from 'vitest';
import { PAGES, pageRoles, type PageName } from '@shared/access';
import { ROLES, type Role } from '@shared/roles';
import { navigation } from '../../client/src/navigation';
import { router } from '../../client/src/router';

// Records where each navigation ends (after the app's own guard) and stops it there, so no page component is loaded.
const landed: string[] = [];
router.beforeEach((to) => {
  landed.push(String(to.name));
  return false;
});

function signInAs(role: Role | null) {
  if (role)
    sessionStorage.setItem(
      'plumbline.session',
      JSON.stringify({
        token: 't',
        expiresAt: Date.now() + 600_000,
        user: { id: 'u1', email: `${role}@example.test`, name: 'Test Person', role, active: true },
      }),
    );
  else sessionStorage.clear();
  setActivePinia(createPinia());
}

const pathOf = (name: string) => {
  const path = router.getRoutes().find((r) => r.name === name)!.path;
  return path.includes('pathMatch') ? '/no-such-page' : path.replace(/:(\w+)/g, 'x1');
};

async function landingOf(path: string): Promise<string> {
  landed.length = 0;
  await router.push(path);
  return landed[landed.length - 1];
}

describe('the router against shared/src/access.ts', () => {
  it('has a rule for every route, and a route for every rule', () => {
    const names = router
      .getRoutes()
      .map((r) => String(r.name))
      .sort();
    expect(names).toEqual(Object.keys(PAGES).sort());
  });

  it.each(ROLES)('%s lands on exactly the pages its rule opens, and on "Not allowed" elsewhere', async (role) => {
    signInAs(role);
    const wrong: string[] = [];
    for (const page of Object.keys(PAGES) as PageName[]) {
      if (page === 'sign-in') continue; // a signed-in user is sent on to the overview
      const expected = pageRoles(page).includes(role) ? page : 'forbidden';
      const got = await landingOf(pathOf(page));
      if (got !== expected) wrong.push(`${page}: ${got}, not ${expected}`);
    }
    expect(wrong).toEqual([]);
    sessionStorage.clear();
  });

  it('sends a signed-out visitor to sign in, except from public pages', async () => {
    signInAs(null);
    for (const page of Object.keys(PAGES) as PageName[]) {
      const got = await landingOf(pathOf(page));
      expect(got, page).toBe(PAGES[page].access === 'public' ? page : 'sign-in');
    }
  });
});

describe('the menu against shared/src/access.ts', () => {
  it('links each item to its own page and shows it to exactly that page’s roles', () => {
    for (const item of navigation) {
      expect(router.resolve(item.to).name, item.title).toBe(item.page);
      expect([...item.roles].sort(), item.title).toEqual([...pageRoles(item.page)].sort());
    }
  });
});
