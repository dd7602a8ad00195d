// Passwords: a minimum length, bcrypt at rest, and never a password or a hash in a response, the audit trail or a log line.
import request from 'supertest';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { PASSWORD_MIN_LENGTH } from '@shared/auth';
import { app, bearer, dataSource, tokenFor, uniqueEmail, useDatabase } from '../helpers/api';

useDatabase();

const BCRYPT = /\$2[aby]\$\d{2}\$[./A-Za-z0-9]{53}/;
let captured: string[] = [];
const originals: Record<string, unknown> = {};

// Every console method and the raw stdout/stderr writers, so a log line cannot slip past.
beforeEach(() => {
  captured = [];
  for (const m of ['log', 'info', 'warn', 'error', 'debug', 'trace'] as const) {
    originals[m] = console[m];
    console[m] = (...args: unknown[]) => {
      captured.push(
        args
          .map((a) =>
            typeof a === 'string'
              ? a
              : (() => {
                  try {
                    return JSON.stringify(a) ?? String(a);
                  } catch {
                    return String(a);
                  }
                })(),
          )
          .join(' '),
      );
    };
  }
  for (const s of ['stdout', 'stderr'] as const) {
    const stream = process[s];
    originals[s] = stream.write;
    stream.write = ((chunk: unknown, ...rest: unknown[]) => {
      captured.push(String(chunk));
      return (originals[s] as typeof stream.write).call(stream, chunk as string, ...(rest as []));
    }) as typeof stream.write;
  }
});
afterEach(() => {
  for (const m of ['log', 'info', 'warn', 'error', 'debug', 'trace'] as const) console[m] = originals[m] as never;
  process.stdout.write = originals.stdout as never;
  process.stderr.write = originals.stderr as never;
});

describe('password policy', () => {
  it(`refuses fewer than ${PASSWORD_MIN_LENGTH} characters on create, reset and change, and accepts exactly ${PASSWORD_MIN_LENGTH}`, async () => {
    expect(PASSWORD_MIN_LENGTH).toBe(12);
    const admin = bearer(await tokenFor('admin'));
    const short = 'a'.repeat(PASSWORD_MIN_LENGTH - 1);
    const tooShort = await request(app)
      .post('/api/users')
      .set(admin)
      .send({ email: uniqueEmail('short'), name: 'Short', role: 'clinician', password: short });
    expect(tooShort.status).toBe(400);
    expect(tooShort.body.error).toMatch(/at least 12 characters/);
    const ok = await request(app)
      .post('/api/users')
      .set(admin)
      .send({
        email: uniqueEmail('exact'),
        name: 'Exact',
        role: 'clinician',
        password: 'b'.repeat(PASSWORD_MIN_LENGTH),
      });
    expect(ok.status).toBe(201);
    const reset = await request(app)
      .post(`/api/users/${ok.body.user.id}/password`)
      .set(admin)
      .send({ newPassword: short });
    expect(reset.status).toBe(400);
    const token = (
      await request(app)
        .post('/api/auth/login')
        .send({ email: ok.body.user.email, password: 'b'.repeat(12) })
    ).body.token;
    const change = await request(app)
      .post('/api/auth/password')
      .set(bearer(token))
      .send({ currentPassword: 'b'.repeat(12), newPassword: short });
    expect(change.status).toBe(400);
    expect(
      (
        await request(app)
          .post('/api/users')
          .set(admin)
          .send({ email: uniqueEmail('long'), name: 'Long', role: 'clinician', password: 'c'.repeat(201) })
      ).status,
    ).toBe(400);
  });

  it('stores bcrypt hashes (cost ≥ 10), never the password', async () => {
    const rows: { password_hash: string }[] = await dataSource.query('SELECT password_hash FROM users');
    expect(rows.length).toBeGreaterThanOrEqual(5);
    for (const r of rows) {
      expect(r.password_hash).toMatch(BCRYPT);
      expect(Number(r.password_hash.slice(4, 6))).toBeGreaterThanOrEqual(10);
      expect(r.password_hash).not.toContain('plumbline-demo-2026');
    }
  });
});

describe('no password or hash leaves the server', () => {
  it('in any response, audit entry or log line of a whole account flow', async () => {
    const admin = bearer(await tokenFor('admin'));
    const first = `first-secret-${Date.now()}-Xy`;
    const second = `second-secret-${Date.now()}-Zq`;
    const third = `third-secret-${Date.now()}-Wk`;
    const email = uniqueEmail('secret');
    const responses: request.Response[] = [];
    const r = async (p: Promise<request.Response> | request.Test) => {
      const res = await p;
      responses.push(res);
      return res;
    };
    const created = await r(
      request(app)
        .post('/api/users')
        .set(admin)
        .send({ email, name: 'Secret Keeper', role: 'statistician', password: first }),
    );
    expect(created.status).toBe(201);
    const id = created.body.user.id as string;
    await r(request(app).post('/api/auth/login').send({ email, password: 'wrong-password-here' }));
    const login = await r(request(app).post('/api/auth/login').send({ email, password: first }));
    expect(login.status).toBe(200);
    const own = bearer(login.body.token);
    await r(request(app).get('/api/auth/me').set(own));
    const changed = await r(
      request(app).post('/api/auth/password').set(own).send({ currentPassword: first, newPassword: second }),
    );
    expect(changed.status).toBe(200);
    await r(
      request(app)
        .post('/api/auth/password')
        .set(bearer(changed.body.token))
        .send({ currentPassword: 'not-the-current-one', newPassword: third }),
    );
    expect(
      (await r(request(app).post(`/api/users/${id}/password`).set(admin).send({ newPassword: third }))).status,
    ).toBe(204);
    await r(request(app).patch(`/api/users/${id}`).set(admin).send({ role: 'steward' }));
    await r(request(app).get('/api/users').set(admin));
    await r(request(app).get('/api/audit').set(admin).query({ limit: 500 }));
    await r(request(app).get('/api/audit.csv').set(admin));
    // A malformed sign-in with the password in it: the validation message must not echo it.
    await r(request(app).post('/api/auth/login').send({ email: 'not an email', password: third }));
    await r(
      request(app)
        .post('/api/auth/login')
        .send({ email, password: { secret: third } }),
    );

    const hashes: { password_hash: string }[] = await dataSource.query('SELECT password_hash FROM users');
    const secrets = [first, second, third, 'plumbline-demo-2026', ...hashes.map((h) => h.password_hash)];
    const texts = [...responses.map((x) => `${JSON.stringify(x.headers)}\n${x.text}`), ...captured];
    const audit: { details: unknown }[] = await dataSource.query('SELECT details FROM audit_log');
    texts.push(...audit.map((a) => JSON.stringify(a.details)));
    for (const text of texts) {
      for (const s of secrets) expect(text.includes(s), `found a secret in: ${text.slice(0, 200)}`).toBe(false);
      expect(BCRYPT.test(text), `found a bcrypt hash in: ${text.slice(0, 200)}`).toBe(false);
      // A field named like the hash column (the words alone may appear in stored data, e.g. injection tests' names).
      expect(text, text.slice(0, 300)).not.toMatch(/"password_?hash"\s*:/i);
    }
    expect(responses.length).toBe(13);
  });
});
