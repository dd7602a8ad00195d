// Pages against the API: each page of the client opens only for roles that may call every API route the page needs
// (shared/src/access.ts against the real route table of the server), so a page can no longer open for a role the API
// then refuses, nor a menu show it one.
import 'reflect-metadata';
import { describe, expect, it } from 'vitest';
import { PAGES, pageAccess, pageRoles, ROLE_SETS, type PageName } from '@shared/access';
import { ROLES } from '@shared/roles';
import { allowedRoles, routeKey, routes } from '../../helpers/routeProbe';

const table = new Map(routes.map((r) => [routeKey(r), r.access]));
const pages = Object.keys(PAGES) as PageName[];

describe('page access (shared/src/access.ts)', () => {
  it('names only API routes that exist in the route table', () => {
    const unknown = pages.flatMap((p) => PAGES[p].api.filter((k) => !table.has(k)).map((k) => `${p}: ${k}`));
    expect(unknown).toEqual([]);
  });

  it('gives every page that is not public at least one API route it needs', () => {
    expect(
      pages.filter(
        (p) => PAGES[p].access !== 'public' && !['forbidden', 'not-found'].includes(p) && PAGES[p].api.length === 0,
      ),
    ).toEqual([]);
  });

  it('opens each page only for roles that may call every API route it needs', () => {
    const refused: string[] = [];
    for (const page of pages) {
      for (const key of PAGES[page].api) {
        const access = table.get(key);
        if (!access) continue;
        if (PAGES[page].access === 'public') {
          if (access !== 'public') refused.push(`${page} is public but ${key} is ${JSON.stringify(access)}`);
          continue;
        }
        const allowed = allowedRoles(access);
        for (const role of pageRoles(page))
          if (!allowed.has(role)) refused.push(`${page} opens for ${role}, but ${key} refuses ${role}`);
      }
    }
    expect(refused).toEqual([]);
  });

  it('each page opens for exactly the roles its main (first) API route allows, so no role is shut out of a page it may use', () => {
    const differ = pages
      .filter((p) => Array.isArray(PAGES[p].access))
      .filter((p) => {
        const main = table.get(PAGES[p].api[0] ?? '');
        if (!main) return true;
        const allowed = allowedRoles(main);
        return ROLES.some((r) => allowed.has(r) !== pageRoles(p).includes(r));
      });
    expect(differ).toEqual([]);
  });

  it('a route name without a rule opens for nobody', () => {
    expect(pageAccess('no-such-page')).toEqual([]);
    expect(pageAccess(undefined)).toEqual([]);
    expect(pageAccess('toString')).toEqual([]);
    expect(pageAccess('runs')).toBe(ROLE_SETS.RUN_TEAM);
  });
});
