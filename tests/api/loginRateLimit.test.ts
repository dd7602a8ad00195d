// Its own file: the per-IP limiter's memory lives per test file, so other files are not throttled.
import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { config } from '../../server/src/platform/config';
import { app, useDatabase } from '../helpers/api';

useDatabase();

describe('per-address sign-in limit', () => {
  it('answers 429 after too many failed sign-ins from one address, whatever the account', async () => {
    let last = 0;
    for (let i = 0; i <= config.loginRateLimit.maxPerIp; i++) {
      const res = await request(app)
        .post('/api/auth/login')
        .send({ email: `guess-${i}@demo.test`, password: 'guess-password' });
      last = res.status;
      if (i < config.loginRateLimit.maxPerIp) expect(res.status).toBe(401);
    }
    expect(last).toBe(429);
  });
});
