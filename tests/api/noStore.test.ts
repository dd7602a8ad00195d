// Every API answer says `Cache-Control: no-store`: answers carry patient-derived rows, sign-in tokens and account data,
// which no browser cache or proxy may keep. Checked on answers with such data, on repeated reads, and on refusals.
import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { routes } from '../../server/src/http/routes/table';
import { app, bearer, dataSource, DEMO_PASSWORD, tokenFor, useDatabase } from '../helpers/api';

useDatabase();

const noStore = (res: request.Response, what: string) => expect(res.headers['cache-control'], what).toBe('no-store');

describe('Cache-Control: no-store', () => {
  it('on the sign-in token, the account and the account list', async () => {
    const login = await request(app)
      .post('/api/auth/login')
      .send({ email: 'admin@demo.test', password: DEMO_PASSWORD });
    expect(login.status).toBe(200);
    noStore(login, 'sign-in');
    noStore(await request(app).get('/api/auth/me').set(bearer(login.body.token)), 'me');
    noStore(await request(app).get('/api/users').set(bearer(login.body.token)), 'users');
  });

  it('on cohort rows, run results and score cards, also when the same read is answered again', async () => {
    const [version] = await dataSource.query(
      'SELECT cohort_id, version FROM cohort_versions ORDER BY created_at LIMIT 1',
    );
    const [run] = await dataSource.query(`SELECT id FROM validation_runs WHERE status = 'completed' LIMIT 1`);
    expect(version && run, 'the seeded demo has a cohort version and a completed run').toBeTruthy();
    const admin = bearer(await tokenFor('admin'));
    const clinician = bearer(await tokenFor('clinician'));
    const reads: [string, Record<string, string>][] = [
      [`/api/cohorts/${version.cohort_id}/versions/${version.version}/rows`, admin],
      ['/api/cohorts', admin],
      [`/api/runs/${run.id}`, admin],
      [`/api/runs/${run.id}/report`, admin],
      ['/api/scorecards', clinician],
      ['/api/audit', admin],
    ];
    for (const [url, auth] of reads) {
      for (const attempt of ['first', 'second']) {
        const res = await request(app).get(url).set(auth);
        expect(res.status, url).toBe(200);
        noStore(res, `${url} (${attempt} read)`);
      }
    }
  });

  it('on every route of the table when refused, and on unknown routes and broken bodies', async () => {
    for (const r of routes) {
      const url = r.path.replace(/:[A-Za-z]+/g, '00000000-0000-4000-8000-000000000000');
      const res = await request(app)[r.method](url);
      noStore(res, `${r.method} ${r.path} → ${res.status}`);
    }
    noStore(await request(app).get('/api/no-such-route'), 'unknown route');
    noStore(
      await request(app).post('/api/auth/login').set('Content-Type', 'application/json').send('{"email":'),
      'broken JSON',
    );
  });
});
