// Cross-origin use: Plumbline is a same-origin app (the API serves the client), so it sends no CORS headers at all.
// Without Access-Control-Allow-Origin a browser refuses to let a page from another origin read any answer, and
// without an approving preflight it never sends a request with a JSON body or an Authorization header.
// Checked here for every route in the route table (preflight) and for the answers themselves; same-origin use works.
// The rules are the Fetch standard's CORS protocol (WHATWG Fetch, "CORS protocol"); common practice, no source for
// the choice itself.
import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { routes } from '../../server/src/http/routes/table';
import { app, bearer, DEMO_PASSWORD, tokenFor, useDatabase } from '../helpers/api';

useDatabase();

const FOREIGN = 'https://elsewhere.example';
const SAME = 'http://127.0.0.1:3000';

const corsHeaders = (headers: Record<string, string | undefined>) =>
  Object.keys(headers).filter((h) => h.toLowerCase().startsWith('access-control-'));

/** A concrete path for a route pattern (ids as UUIDs, version numbers as 1). */
const concrete = (pattern: string) =>
  pattern.replace(/:(\w+)/g, (_m, name: string) =>
    /^version$/i.test(name) ? '1' : '8c0e4c7e-5d6b-4f0a-9a53-2f1d3c1b9e77',
  );

describe('CORS: no cross-origin reads or writes', () => {
  it('grants no preflight from a foreign origin, for any route in the table', async () => {
    expect(routes.length).toBeGreaterThan(20);
    for (const route of routes) {
      const res = await request(app)
        .options(concrete(route.path))
        .set('Origin', FOREIGN)
        .set('Access-Control-Request-Method', route.method.toUpperCase())
        .set('Access-Control-Request-Headers', 'authorization, content-type');
      expect(corsHeaders(res.headers), `${route.method.toUpperCase()} ${route.path}`).toEqual([]);
    }
  });

  it('answers a foreign-origin request without Access-Control-Allow-Origin, signed in or not', async () => {
    const token = await tokenFor('admin');
    for (const path of ['/api/health', '/api/scorecards', '/api/cohorts', '/api/audit', '/api/no-such-route']) {
      const res = await request(app).get(path).set('Origin', FOREIGN).set(bearer(token));
      expect(corsHeaders(res.headers), path).toEqual([]);
    }
    // The browser's "null" origin (sandboxed frames, file: pages) gets nothing either.
    const nullOrigin = await request(app).get('/api/health').set('Origin', 'null');
    expect(corsHeaders(nullOrigin.headers)).toEqual([]);
  });

  it('does not sign anyone in from a cross-site form post (no JSON without a preflight)', async () => {
    // A foreign page can send a "simple" POST without a preflight, but only as text/plain, form or multipart data.
    // The API reads JSON only, so such a post is refused and no token is issued.
    const body = JSON.stringify({ email: 'admin@demo.test', password: DEMO_PASSWORD });
    for (const type of ['text/plain', 'application/x-www-form-urlencoded']) {
      const res = await request(app)
        .post('/api/auth/login')
        .set('Origin', FOREIGN)
        .set('Content-Type', type)
        .send(body);
      expect(res.status, type).toBe(400);
      expect(res.body.token, type).toBeUndefined();
      expect(corsHeaders(res.headers)).toEqual([]);
    }
  });

  it('works from its own origin', async () => {
    const login = await request(app)
      .post('/api/auth/login')
      .set('Origin', SAME)
      .send({ email: 'steward@demo.test', password: DEMO_PASSWORD });
    expect(login.status).toBe(200);
    expect(typeof login.body.token).toBe('string');
    const me = await request(app).get('/api/auth/me').set('Origin', SAME).set(bearer(login.body.token));
    expect(me.status).toBe(200);
    expect(me.body.user.email).toBe('steward@demo.test');
    // Same-origin requests need no CORS headers; none are sent.
    expect(corsHeaders(me.headers)).toEqual([]);
  });
});
