// Access control, proven route by route: every route in server/src/http/routes/table.ts × every role, with real tokens.
// Expected access comes from the explicit matrix in tests/helpers/accessMatrix.ts, which must agree with the table.
import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { ROLES, type Role } from '@shared/roles';
import { app, bearer, tokenFor, useDatabase } from '../helpers/api';
import { accessMatrix } from '../helpers/accessMatrix';
import { allowedRoles, concretePath, isPublic, mountedRoutes, routeKey, routes } from '../helpers/routeProbe';

useDatabase();

const norm = (a: unknown) => (typeof a === 'string' ? a : JSON.stringify([...(a as string[])].sort()));
const send = (method: string, path: string) => {
  const agent = request(app);
  const r = (agent as unknown as Record<string, (p: string) => request.Test>)[method](path);
  return method === 'get' || method === 'delete' ? r : r.send({});
};

describe('the access matrix', () => {
  it('has exactly one entry per route in the table, and they agree', () => {
    const keys = routes.map(routeKey);
    expect(new Set(keys).size, 'duplicate METHOD path in http/routes/table.ts').toBe(keys.length);
    const missing = keys.filter((k) => !(k in accessMatrix));
    expect(
      missing,
      'routes without an entry in tests/helpers/accessMatrix.ts (npx tsx server/scripts/print-access-matrix.ts --write)',
    ).toEqual([]);
    const stale = Object.keys(accessMatrix).filter((k) => !keys.includes(k));
    expect(stale, 'matrix entries for routes that no longer exist').toEqual([]);
    const differ = routes.filter((r) => norm(r.access) !== norm(accessMatrix[routeKey(r)])).map(routeKey);
    expect(differ, 'access in http/routes/table.ts differs from tests/helpers/accessMatrix.ts').toEqual([]);
  });

  it('covers every route the app mounts: nothing is reachable outside the table', () => {
    const mounted = mountedRoutes(app).filter((k) => k.split(' ')[1].startsWith('/api'));
    const keys = new Set(routes.map(routeKey));
    expect(mounted.filter((k) => !keys.has(k))).toEqual([]);
  });
});

describe('every route × role against the running app', () => {
  it('refuses a request without a token with 401 on every non-public route', async () => {
    const wrong: string[] = [];
    for (const r of routes) {
      if (isPublic(r.access)) continue;
      const res = await send(r.method, concretePath(r.path));
      if (res.status !== 401) wrong.push(`${routeKey(r)} → ${res.status}`);
    }
    expect(wrong).toEqual([]);
  });

  it('lets a public route answer without a token (not 401/403)', async () => {
    for (const r of routes.filter((x) => isPublic(x.access))) {
      const res = await send(r.method, concretePath(r.path));
      expect([401, 403], routeKey(r)).not.toContain(res.status);
    }
  });

  it('answers exactly 403 to each forbidden pair and never 401/403/5xx to an allowed pair', async () => {
    const tokens = Object.fromEntries(await Promise.all(ROLES.map(async (r) => [r, await tokenFor(r)]))) as Record<
      Role,
      string
    >;
    const wrong: string[] = [];
    let pairs = 0;
    for (const r of routes) {
      const expected = allowedRoles(accessMatrix[routeKey(r)] ?? r.access);
      for (const role of ROLES) {
        pairs++;
        const res = await send(r.method, concretePath(r.path)).set(bearer(tokens[role]));
        const ok = expected.has(role) ? ![401, 403].includes(res.status) && res.status < 500 : res.status === 403;
        if (!ok)
          wrong.push(
            `${routeKey(r)} as ${role} (${expected.has(role) ? 'allowed' : 'forbidden'}) → ${res.status} ${JSON.stringify(res.body).slice(0, 120)}`,
          );
        if (!expected.has(role)) expect(res.body.error, routeKey(r)).toMatch(/role/);
      }
    }
    console.log(`access matrix: ${routes.length} routes × ${ROLES.length} roles = ${pairs} pairs walked`);
    expect(wrong).toEqual([]);
  });
});
