import jwt from 'jsonwebtoken';
import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { config } from '../../server/src/platform/config';
import {
  app,
  bearer,
  countRows,
  dataSource,
  DEMO_PASSWORD,
  loginAs,
  tokenFor,
  uniqueEmail,
  useDatabase,
} from '../helpers/api';

useDatabase();

describe('POST /api/auth/login', () => {
  it('returns a token and the user for a demo account', async () => {
    const res = await request(app)
      .post('/api/auth/login')
      .send({ email: 'statistician@demo.test', password: DEMO_PASSWORD });
    expect(res.status).toBe(200);
    expect(res.body.user).toMatchObject({ email: 'statistician@demo.test', role: 'statistician' });
    expect(res.body.user).not.toHaveProperty('passwordHash');
    expect(res.body.expiresInSeconds).toBe(config.tokenLifetimeSeconds);
    expect(typeof res.body.token).toBe('string');
  });

  it('gives the same generic 401 for an unknown e-mail and a wrong password', async () => {
    const unknown = await request(app)
      .post('/api/auth/login')
      .send({ email: 'nobody@demo.test', password: 'whatever-password' });
    const wrong = await request(app)
      .post('/api/auth/login')
      .send({ email: 'clinician@demo.test', password: 'not-the-password' });
    expect(unknown.status).toBe(401);
    expect(wrong.status).toBe(401);
    expect(unknown.body.error).toBe(wrong.body.error);
    // A successful sign-in clears the failure count so later tests are not locked out.
    await loginAs('clinician@demo.test');
  });

  it('rejects a malformed body with 400 and a clear message', async () => {
    const res = await request(app).post('/api/auth/login').send({ email: 'not-an-email' });
    expect(res.status).toBe(400);
    expect(res.body.error).toMatch(/email/);
    const broken = await request(app).post('/api/auth/login').set('Content-Type', 'application/json').send('{"email":');
    expect(broken.status).toBe(400);
    expect(broken.body.error).toMatch(/not valid JSON/);
  });

  it('writes sign-ins and failures to the audit trail with the source IP', async () => {
    const before = await countRows('audit_log');
    await request(app).post('/api/auth/login').send({ email: 'steward@demo.test', password: 'wrong-password-1' });
    await loginAs('steward@demo.test');
    const rows: { action: string; source_ip: string }[] = await dataSource.query(
      `SELECT action, source_ip FROM audit_log WHERE actor_email = 'steward@demo.test' ORDER BY seq DESC LIMIT 2`,
    );
    expect(await countRows('audit_log')).toBe(before + 2);
    expect(rows.map((r) => r.action)).toEqual(['auth.login', 'auth.login_failed']);
    expect(rows[0].source_ip).toMatch(/127\.0\.0\.1|::1|::ffff:127/);
  });
});

describe('GET /api/auth/me', () => {
  it('returns the user for a valid token', async () => {
    const res = await request(app)
      .get('/api/auth/me')
      .set(bearer(await tokenFor('chair')));
    expect(res.status).toBe(200);
    expect(res.body.user.role).toBe('chair');
  });

  it('refuses a missing, tampered, foreign-secret, alg:none and expired token', async () => {
    const good = await tokenFor('admin');
    const [h, p, s] = good.split('.');
    const payload = JSON.parse(Buffer.from(p, 'base64url').toString());
    const tamperedPayload = Buffer.from(JSON.stringify({ ...payload, role: 'chair' })).toString('base64url');
    const none = `${Buffer.from(JSON.stringify({ alg: 'none', typ: 'JWT' })).toString('base64url')}.${p}.`;
    const foreign = jwt.sign({ sub: payload.sub, role: payload.role, tv: payload.tv }, 'another-secret', {
      algorithm: 'HS256',
    });
    const expired = jwt.sign(
      { sub: payload.sub, role: payload.role, tv: payload.tv, exp: Math.floor(Date.now() / 1000) - 10 },
      config.jwtSecret,
      { algorithm: 'HS256' },
    );
    const hs512 = jwt.sign({ sub: payload.sub, role: payload.role, tv: payload.tv }, config.jwtSecret, {
      algorithm: 'HS512',
    });
    expect((await request(app).get('/api/auth/me')).status).toBe(401);
    for (const token of [`${h}.${tamperedPayload}.${s}`, none, foreign, expired, hs512, 'garbage']) {
      const res = await request(app).get('/api/auth/me').set(bearer(token));
      expect(res.status, token).toBe(401);
    }
  });

  it('refuses a correctly signed token that has no expiry, or one whose lifetime is longer than the setting', async () => {
    const payload = JSON.parse(Buffer.from((await tokenFor('admin')).split('.')[1], 'base64url').toString());
    const claims = { sub: payload.sub, role: payload.role, tv: payload.tv };
    const forever = jwt.sign(claims, config.jwtSecret, { algorithm: 'HS256' });
    const tooLong = jwt.sign(claims, config.jwtSecret, {
      algorithm: 'HS256',
      expiresIn: config.tokenLifetimeSeconds * 100,
    });
    const fine = jwt.sign(claims, config.jwtSecret, { algorithm: 'HS256', expiresIn: config.tokenLifetimeSeconds });
    expect((await request(app).get('/api/auth/me').set(bearer(forever))).status).toBe(401);
    expect((await request(app).get('/api/auth/me').set(bearer(tooLong))).status).toBe(401);
    expect((await request(app).get('/api/auth/me').set(bearer(fine))).status).toBe(200);
  });
});

describe('role guard and account management', () => {
  it('lets only the admin list accounts', async () => {
    for (const role of ['steward', 'statistician', 'chair', 'clinician'] as const) {
      const res = await request(app)
        .get('/api/users')
        .set(bearer(await tokenFor(role)));
      expect(res.status, role).toBe(403);
    }
    const res = await request(app)
      .get('/api/users')
      .set(bearer(await tokenFor('admin')));
    expect(res.status).toBe(200);
    expect(res.body.users.length).toBeGreaterThanOrEqual(5);
    expect(JSON.stringify(res.body)).not.toMatch(/password/i);
  });

  it('creates, re-roles, deactivates and resets an account, with audit rows, and old tokens stop working', async () => {
    const admin = bearer(await tokenFor('admin'));
    const email = uniqueEmail('nurse');
    const created = await request(app)
      .post('/api/users')
      .set(admin)
      .send({ email, name: 'Test Nurse', role: 'steward', password: 'a-long-password-1' });
    expect(created.status).toBe(201);
    const id = created.body.user.id;
    const token = await loginAs(email, 'a-long-password-1');
    expect((await request(app).get('/api/auth/me').set(bearer(token))).status).toBe(200);

    const reroled = await request(app).patch(`/api/users/${id}`).set(admin).send({ role: 'clinician' });
    expect(reroled.body.user.role).toBe('clinician');
    expect((await request(app).get('/api/auth/me').set(bearer(token))).status).toBe(401);

    expect(
      (await request(app).post(`/api/users/${id}/password`).set(admin).send({ newPassword: 'short' })).status,
    ).toBe(400);
    expect(
      (await request(app).post(`/api/users/${id}/password`).set(admin).send({ newPassword: 'another-long-password' }))
        .status,
    ).toBe(204);
    const token2 = await loginAs(email, 'another-long-password');

    await request(app).patch(`/api/users/${id}`).set(admin).send({ active: false });
    expect((await request(app).get('/api/auth/me').set(bearer(token2))).status).toBe(401);
    expect((await request(app).post('/api/auth/login').send({ email, password: 'another-long-password' })).status).toBe(
      401,
    );

    const actions: { action: string }[] = await dataSource.query(
      `SELECT action FROM audit_log WHERE target_id = $1 ORDER BY seq`,
      [id],
    );
    expect(actions.map((a) => a.action)).toEqual(['user.create', 'user.update', 'user.reset_password', 'user.update']);
  });

  it('lets a user change their own password only with the current one', async () => {
    const admin = bearer(await tokenFor('admin'));
    const email = uniqueEmail('stat');
    await request(app)
      .post('/api/users')
      .set(admin)
      .send({ email, name: 'Test Statistician', role: 'statistician', password: 'first-long-password' });
    const token = await loginAs(email, 'first-long-password');
    const wrong = await request(app)
      .post('/api/auth/password')
      .set(bearer(token))
      .send({ currentPassword: 'nope', newPassword: 'second-long-password' });
    expect(wrong.status).toBe(403);
    const ok = await request(app)
      .post('/api/auth/password')
      .set(bearer(token))
      .send({ currentPassword: 'first-long-password', newPassword: 'second-long-password' });
    expect(ok.status).toBe(200);
    await loginAs(email, 'second-long-password');
  });
});

describe('brute force', () => {
  it('locks an account after repeated failures, with a clear message and an audit entry', async () => {
    const admin = bearer(await tokenFor('admin'));
    const email = uniqueEmail('target');
    await request(app)
      .post('/api/users')
      .set(admin)
      .send({ email, name: 'Lock Target', role: 'clinician', password: 'the-right-password' });
    for (let i = 0; i < config.loginRateLimit.maxFailuresPerAccount; i++) {
      expect(
        (
          await request(app)
            .post('/api/auth/login')
            .send({ email, password: `wrong-${i}` })
        ).status,
      ).toBe(401);
    }
    // The same answer as an unknown e-mail, so it does not tell that the account exists (tests/api/signinAbuse.test.ts).
    const locked = await request(app).post('/api/auth/login').send({ email, password: 'the-right-password' });
    expect(locked.status).toBe(401);
    expect(locked.body.error).toMatch(/locked for a while after too many failed sign-ins/);
    const rows: { action: string }[] = await dataSource.query(
      `SELECT action FROM audit_log WHERE actor_email = $1 ORDER BY seq`,
      [email],
    );
    expect(rows.map((r) => r.action)).toContain('auth.account_locked');
  });
});

describe('GET /api/health', () => {
  it('reports the database up', async () => {
    const res = await request(app).get('/api/health');
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ status: 'ok', database: 'up' });
  });
});
