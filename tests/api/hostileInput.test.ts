// Error responses never show stack traces or SQL, and SQL-injection strings in every text field, query filter and
// path parameter of every route in the table are refused or treated as plain data — the database is unchanged.
import { vi } from 'vitest';

// Many deliberately bad sign-ins below: lift the per-IP and per-account limits for this file only.
vi.hoisted(() => {
  process.env.PLUMBLINE_LOGIN_MAX_PER_IP = '100000';
  process.env.PLUMBLINE_LOGIN_MAX_FAILURES = '100000';
});

import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { app, bearer, dataSource, tokenFor, useDatabase } from '../helpers/api';
import {
  callerFor,
  concretePath,
  fieldPaths,
  leakMarkers,
  routeKey,
  routes,
  setPath,
  tableCounts,
  type RouteDef,
} from '../helpers/routeProbe';

useDatabase();

// Classic injection strings (OWASP testing guide, common practice): tautology, stacked query, comment, union, time delay.
export const INJECTIONS = [
  "' OR 1=1 --",
  '"; DROP TABLE users; --',
  "'; DROP TABLE audit_log; --",
  "1' UNION SELECT password_hash FROM users --",
  "'; SELECT pg_sleep(3); --",
  "%' AND 1=1 AND '%'='",
  '\\',
  "admin'/*",
];

// Tables whose counts may move for reasons outside the request under test (audit rows of failed sign-ins).
const MAY_CHANGE = ['audit_log'];

const counts = () => tableCounts((sql) => dataSource.query(sql), MAY_CHANGE);

async function call(route: RouteDef, opts: { path?: string; query?: Record<string, unknown>; body?: unknown }) {
  const role = callerFor(route.access);
  const agent = request(app);
  let req = (agent as unknown as Record<string, (p: string) => request.Test>)[route.method](
    opts.path ?? concretePath(route.path),
  );
  if (role) req = req.set(bearer(await tokenFor(role)));
  if (opts.query) req = req.query(opts.query as Record<string, string>);
  if (opts.body !== undefined && route.method !== 'get') req = req.send(opts.body as object);
  return req;
}

function checkResponse(label: string, res: request.Response, injected: string, problems: string[]) {
  const text = (res.text ?? '').split(injected).join('').split(JSON.stringify(injected).slice(1, -1)).join('');
  if (res.status >= 500) problems.push(`${label} → ${res.status}`);
  const leaks = leakMarkers(text);
  if (leaks.length) problems.push(`${label} leaks ${leaks.join(', ')}: ${text.slice(0, 160)}`);
  if (res.status >= 400 && !/json/.test(String(res.headers['content-type'])))
    problems.push(`${label} → ${res.status} is not JSON`);
  if (res.status >= 400 && typeof res.body?.error !== 'string')
    problems.push(`${label} → ${res.status} has no error message`);
}

describe('error responses', () => {
  it('answer a malformed id with a 400/404 JSON message and no internals', async () => {
    const problems: string[] = [];
    let n = 0;
    for (const route of routes.filter((r) => r.path.includes(':'))) {
      for (const bad of ['not-a-uuid', '00000000-0000-0000-0000-00000000000Z', '-1', '1e309', '%00', 'x'.repeat(300)]) {
        n++;
        const res = await call(route, { path: concretePath(route.path, () => bad), body: {} });
        checkResponse(`${routeKey(route)} id=${bad.slice(0, 20)}`, res, bad, problems);
        if (![400, 404, 409, 422].includes(res.status))
          problems.push(`${routeKey(route)} id=${bad.slice(0, 20)} → ${res.status}`);
      }
    }
    console.log(`malformed ids: ${n} requests`);
    expect(problems).toEqual([]);
  });

  it('never show a stack trace for an unknown route, a wrong method or a broken body', async () => {
    const admin = await tokenFor('admin');
    for (const res of [
      await request(app).get('/api/no-such-thing').set(bearer(admin)),
      await request(app).delete('/api/users').set(bearer(admin)),
      await request(app)
        .post('/api/users')
        .set(bearer(admin))
        .set('Content-Type', 'application/json')
        .send('{"email": "x", '),
      await request(app)
        .post('/api/users')
        .set(bearer(admin))
        .set('Content-Type', 'application/json')
        .send(`"${'a'.repeat(2 * 1024 * 1024)}"`),
    ]) {
      expect(res.status).toBeGreaterThanOrEqual(400);
      expect(res.status).toBeLessThan(500);
      expect(res.body.error).toEqual(expect.any(String));
      expect(leakMarkers(res.text)).toEqual([]);
    }
  });
});

describe('SQL injection strings', () => {
  it('in every body field, query filter and path parameter: refused or inert, no internals, nothing changed', async () => {
    const tablesBefore = await counts();
    const problems: string[] = [];
    let n = 0;
    for (const route of routes) {
      const bodyPaths = route.method === 'get' ? [] : fieldPaths(route.body);
      const queryPaths = fieldPaths(route.query, 1);
      for (const inj of INJECTIONS) {
        const jobs: [string, Parameters<typeof call>[1]][] = [
          ...bodyPaths.map((p): [string, Parameters<typeof call>[1]] => [
            `body.${p.join('.')}`,
            { body: setPath(p, inj) },
          ]),
          ...queryPaths.map((p): [string, Parameters<typeof call>[1]] => [
            `query.${p[0]}`,
            { query: { [p[0]]: inj }, body: {} },
          ]),
        ];
        if (route.path.includes(':')) jobs.push(['path', { path: concretePath(route.path, () => inj), body: {} }]);
        for (const [where, opts] of jobs) {
          n++;
          const started = Date.now();
          const res = await call(route, opts);
          // A pg_sleep that ran would hold the answer for 3 s.
          if (Date.now() - started > 2500) problems.push(`${routeKey(route)} ${where} took ${Date.now() - started} ms`);
          checkResponse(`${routeKey(route)} ${where}=${JSON.stringify(inj)}`, res, inj, problems);
        }
      }
    }
    console.log(`injection strings: ${n} requests over ${routes.length} routes`);
    expect(problems).toEqual([]);
    const tablesAfter = await counts();
    expect(Object.keys(tablesAfter).sort()).toEqual(Object.keys(tablesBefore).sort());
    expect(tablesAfter).toEqual(tablesBefore);
  });

  it('in a valid create: stored and shown verbatim as data, every table still there', async () => {
    const admin = bearer(await tokenFor('admin'));
    const tablesBefore = Object.keys(await counts()).sort();
    const name = '"; DROP TABLE users; --';
    const email = `o'brien-${Date.now()}@example.test`;
    const created = await request(app)
      .post('/api/users')
      .set(admin)
      .send({ email, name, role: 'clinician', password: "' OR 1=1 -- long enough" });
    expect(created.status).toBe(201);
    const list = await request(app).get('/api/users').set(admin);
    expect(list.body.users.find((u: { email: string }) => u.email === email)?.name).toBe(name);
    const audit = await request(app).get('/api/audit').set(admin).query({ actor: "' OR 1=1 --" });
    expect(audit.status).toBe(200);
    expect(audit.body.total).toBe(0);
    const score = await request(app)
      .post('/api/scores')
      .set(admin)
      .send({
        name: `${INJECTIONS[3]} ${Date.now()}`,
        outcomeDefinition: INJECTIONS[0],
        timeHorizon: INJECTIONS[1],
        intendedPopulation: INJECTIONS[2],
        citation: INJECTIONS[4],
        cautionText: INJECTIONS[5],
      });
    if (score.status !== 404) {
      expect(score.status).toBe(201);
      expect(
        leakMarkers(INJECTIONS.reduce((t, inj) => t.split(JSON.stringify(inj).slice(1, -1)).join(''), score.text)),
      ).toEqual([]);
    }
    expect(Object.keys(await counts()).sort()).toEqual(tablesBefore);
    expect(Number((await dataSource.query('SELECT count(*) AS n FROM users'))[0].n)).toBeGreaterThanOrEqual(5);
  });

  it('the leak detector itself finds a stack frame, driver error text and SQL', () => {
    expect(leakMarkers('Error: x\n    at Object.<anonymous> (/work/main/server/src/http/app.ts:10:5)')).toEqual(
      expect.arrayContaining(['stack frame', 'source path']),
    );
    expect(leakMarkers('QueryFailedError: syntax error at or near "OR"')).toEqual(
      expect.arrayContaining(['QueryFailedError', 'PostgreSQL error text']),
    );
    expect(leakMarkers('{"error":"SELECT * FROM users"}')).toEqual(['SQL']);
    expect(leakMarkers('{"error":"invalid body: email: email must be an e-mail address"}')).toEqual([]);
  });

  it('in the sign-in e-mail and password: 400/401 and the accounts are intact', async () => {
    const before: { n: string }[] = await dataSource.query('SELECT count(*)::text AS n FROM users');
    for (const inj of INJECTIONS) {
      const a = await request(app)
        .post('/api/auth/login')
        .send({ email: `admin@demo.test${inj}`, password: inj });
      const b = await request(app).post('/api/auth/login').send({ email: 'admin@demo.test', password: inj });
      expect([400, 401]).toContain(a.status);
      expect(b.status).toBe(401);
      expect(leakMarkers(a.text.split(inj).join(''))).toEqual([]);
    }
    const after: { n: string }[] = await dataSource.query('SELECT count(*)::text AS n FROM users');
    expect(after[0].n).toBe(before[0].n);
    // Clear the failure count for later suites.
    expect(
      (await request(app).post('/api/auth/login').send({ email: 'admin@demo.test', password: 'plumbline-demo-2026' }))
        .status,
    ).toBe(200);
  });
});
