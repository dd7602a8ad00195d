// Sign-in abuse, as an attacker would try it: spoofed X-Forwarded-For addresses, parallel guesses, telling locked
// accounts from unknown ones, and guessing the password through the re-entry of sign-off, revocation and password change.
import { randomUUID } from 'node:crypto';
import request from 'supertest';
import { afterAll, describe, expect, it } from 'vitest';
import { createApp } from '../../server/src/http/app';
import { config } from '../../server/src/platform/config';
import { app, bearer, dataSource, loginAs, tokenFor, uniqueEmail, useDatabase } from '../helpers/api';

useDatabase();

// A second app behind a named proxy (PLUMBLINE_TRUST_PROXY=loopback): there X-Forwarded-For is the client's address,
// so each test below signs in "from" addresses of its own and the per-address limit of one test does not touch another.
const saved = config.trustProxy;
config.trustProxy = 'loopback';
const proxied = createApp({ serveClient: false });
config.trustProxy = saved;
afterAll(() => {
  config.trustProxy = saved;
});

let lastOctet = 0;
const freshAddress = () => `198.51.100.${++lastOctet}`;

async function newAccount(role: 'clinician' | 'chair' | 'statistician', password = 'the-right-password') {
  const email = uniqueEmail(`abuse-${role}`);
  const res = await request(app)
    .post('/api/users')
    .set(bearer(await tokenFor('admin')))
    .send({ email, name: `Abuse ${role}`, role, password });
  expect(res.status).toBe(201);
  return { email, id: res.body.user.id as string, password };
}

const auditOf = async (
  email: string,
): Promise<{ action: string; details: Record<string, unknown>; source_ip: string }[]> =>
  dataSource.query('SELECT action, details, source_ip FROM audit_log WHERE actor_email = $1 ORDER BY seq', [email]);

describe('the failure counter', () => {
  it('lets 25 parallel wrong tries make at most the configured number of guesses', async () => {
    const { email, password } = await newAccount('clinician');
    // Each try from its own address, so only the per-account counter stands in the way.
    const answers = await Promise.all(
      Array.from({ length: 25 }, (_, i) =>
        request(proxied)
          .post('/api/auth/login')
          .set('X-Forwarded-For', freshAddress())
          .send({ email, password: `wrong-guess-${i}` }),
      ),
    );
    expect(answers.map((a) => a.status)).toEqual(Array(25).fill(401));
    const guesses = (await auditOf(email)).filter((r) => r.details.reason === 'wrong password');
    expect(guesses.length).toBe(config.loginRateLimit.maxFailuresPerAccount);
    // Locked now: even the right password is refused.
    expect(
      (await request(proxied).post('/api/auth/login').set('X-Forwarded-For', freshAddress()).send({ email, password }))
        .status,
    ).toBe(401);
  });
});

describe('one answer', () => {
  it('a locked account answers exactly as an unknown e-mail and a wrong password do', async () => {
    const { email, password } = await newAccount('clinician');
    const from = freshAddress();
    for (let i = 0; i < config.loginRateLimit.maxFailuresPerAccount; i++) {
      await request(proxied)
        .post('/api/auth/login')
        .set('X-Forwarded-For', from)
        .send({ email, password: `wrong-${i}` })
        .expect(401);
    }
    const locked = await request(proxied)
      .post('/api/auth/login')
      .set('X-Forwarded-For', from)
      .send({ email, password });
    const unknown = await request(proxied)
      .post('/api/auth/login')
      .set('X-Forwarded-For', from)
      .send({ email: uniqueEmail('nobody'), password });
    const other = await newAccount('clinician');
    const wrong = await request(proxied)
      .post('/api/auth/login')
      .set('X-Forwarded-For', from)
      .send({ email: other.email, password: 'not-it-at-all' });
    expect({ status: locked.status, body: locked.body }).toEqual({ status: unknown.status, body: unknown.body });
    expect({ status: wrong.status, body: wrong.body }).toEqual({ status: unknown.status, body: unknown.body });
    expect(locked.status).toBe(401);
    // The audit trail keeps the real reason.
    expect((await auditOf(email)).map((r) => r.action)).toEqual([
      ...Array(4).fill('auth.login_failed'),
      'auth.account_locked',
      'auth.login_locked',
    ]);
  });
});

describe('password re-entry', () => {
  const limit = config.loginRateLimit.maxFailuresPerAccount;

  it('for a sign-off is limited like sign-in and every failure is audited', async () => {
    const chair = await newAccount('chair');
    const token = await loginAs(chair.email, chair.password);
    // A run that does not exist: the password is checked before anything else, so a right one answers 404.
    const runId = randomUUID();
    const sign = (password: string) =>
      request(app).post(`/api/runs/${runId}/signoff`).set(bearer(token)).send({ decision: 'approve', password });
    for (let i = 0; i < limit; i++) expect((await sign(`wrong-${i}`)).status).toBe(403);
    const afterLimit = await sign(chair.password);
    expect(afterLimit.status).toBe(429);
    expect(afterLimit.body.error).toMatch(/too many wrong passwords/);
    const actions = (await auditOf(chair.email)).map((r) => r.action);
    expect(actions.filter((a) => a === 'signature.password_failed')).toHaveLength(limit);
    expect(actions).toContain('auth.account_locked');
    expect(actions.at(-1)).toBe('signature.password_locked');
    // The lock is the account's: signing in is refused too.
    expect(
      (await request(app).post('/api/auth/login').send({ email: chair.email, password: chair.password })).status,
    ).toBe(401);
  });

  it('for a revocation counts against the same allowance', async () => {
    const chair = await newAccount('chair');
    const token = await loginAs(chair.email, chair.password);
    const revoke = (password: string) =>
      request(app)
        .post(`/api/score-versions/${randomUUID()}/revoke`)
        .set(bearer(token))
        .send({ password, reason: 'probe' });
    for (let i = 0; i < limit; i++) expect((await revoke(`wrong-${i}`)).status).toBe(403);
    expect((await revoke(chair.password)).status).toBe(429);
    expect((await auditOf(chair.email)).filter((r) => r.action === 'signature.password_failed')).toHaveLength(limit);
  });

  it('for a password change is limited, and failed changes are audited', async () => {
    const stat = await newAccount('statistician');
    const token = await loginAs(stat.email, stat.password);
    const change = (currentPassword: string) =>
      request(app)
        .post('/api/auth/password')
        .set(bearer(token))
        .send({ currentPassword, newPassword: 'a-brand-new-password' });
    for (let i = 0; i < limit; i++) expect((await change(`wrong-${i}`)).status).toBe(403);
    expect((await change(stat.password)).status).toBe(429);
    const actions = (await auditOf(stat.email)).map((r) => r.action);
    expect(actions.filter((a) => a === 'user.change_password.password_failed')).toHaveLength(limit);
    expect(actions).not.toContain('user.change_password');
  });

  it('a right password clears the count, so a few slips do not add up over time', async () => {
    const stat = await newAccount('statistician');
    const token = await loginAs(stat.email, stat.password);
    for (let i = 0; i < limit - 1; i++) {
      await request(app)
        .post('/api/auth/password')
        .set(bearer(token))
        .send({ currentPassword: `wrong-${i}`, newPassword: 'a-brand-new-password' })
        .expect(403);
    }
    await loginAs(stat.email, stat.password);
    await request(app)
      .post('/api/auth/password')
      .set(bearer(token))
      .send({ currentPassword: 'wrong-again', newPassword: 'a-brand-new-password' })
      .expect(403);
    await loginAs(stat.email, stat.password);
  });
});

// Last: it uses up the per-address limit of the loopback address that the plain app sees.
describe('X-Forwarded-For', () => {
  it('is ignored without a named proxy: spoofed addresses get no fresh limit and never reach the audit trail', async () => {
    expect(config.trustProxy).toBe('');
    const { email } = await newAccount('clinician');
    const statuses: number[] = [];
    for (let i = 0; i < config.loginRateLimit.maxPerIp + 5; i++) {
      const res = await request(app)
        .post('/api/auth/login')
        .set('X-Forwarded-For', `203.0.113.${i + 1}`)
        .send({ email, password: `wrong-${i}` });
      statuses.push(res.status);
    }
    // Every try comes from the same socket address, so the per-address limit answers 429 once it is used up.
    expect(statuses.filter((s) => s === 429).length).toBeGreaterThanOrEqual(5);
    const rows = await auditOf(email);
    expect(rows.length).toBeGreaterThan(0);
    for (const r of rows) expect(r.source_ip).not.toMatch(/203\.0\.113\./);
  });

  it('is believed from the named proxy, for the limit and for the audit trail', async () => {
    const { email } = await newAccount('clinician');
    const address = freshAddress();
    await request(proxied)
      .post('/api/auth/login')
      .set('X-Forwarded-For', address)
      .send({ email, password: 'wrong-password-1' })
      .expect(401);
    const rows = await auditOf(email);
    expect(rows.at(-1)?.source_ip).toBe(address);
  });
});
