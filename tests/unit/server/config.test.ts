// Settings are read and checked once (server/src/platform/config.ts): a bad value names its variable; production refuses
// missing, development or weak signing secrets.
import { randomBytes } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import { ConfigError, DEV_JWT_SECRET, jwtSecretProblem, loadConfig } from '../../../server/src/platform/config';

const fails = (env: Record<string, string>) => {
  try {
    loadConfig(env);
  } catch (e) {
    expect(e).toBeInstanceOf(ConfigError);
    return (e as Error).message;
  }
  throw new Error('loadConfig accepted ' + JSON.stringify(env));
};
const goodSecret = () => randomBytes(32).toString('base64');

describe('loadConfig', () => {
  it('uses the documented defaults when nothing is set', () => {
    const c = loadConfig({});
    expect(c.port).toBe(3000);
    expect(c.db.port).toBe(54329);
    expect(c.db.user).toBe('plumbline_app');
    expect(c.dbOwner.user).toBe('postgres');
    expect(c.production).toBe(false);
    expect(c.jwtSecret).toBe(DEV_JWT_SECRET);
  });

  it.each([
    ['PORT', 'abc'],
    ['PGPORT', '54x'],
    ['PLUMBLINE_TOKEN_SECONDS', 'abc'],
    ['PLUMBLINE_UPLOAD_LIMIT_MB', 'lots'],
    ['PLUMBLINE_UPLOAD_THREADS', '1.5'],
    ['PLUMBLINE_WORKER_NICE', '40'],
    ['SMTP_SECURE', 'yes please'],
    ['PLUMBLINE_DB_APP_USER', 'app; DROP TABLE users'],
    ['PLUMBLINE_PUBLIC_URL', 'not a url'],
  ])('stops on %s=%s and names the variable', (name, value) => {
    expect(fails({ [name]: value })).toContain(name);
  });

  it('treats an empty value as not set', () => {
    expect(loadConfig({ PORT: '', PLUMBLINE_UPLOAD_THREADS: '' }).port).toBe(3000);
  });

  it('refuses a runtime role that is also the owner role', () => {
    expect(fails({ PGUSER: 'plumbline', PLUMBLINE_DB_APP_USER: 'plumbline' })).toContain('PLUMBLINE_DB_APP_USER');
  });

  it('in production requires a signing secret, refuses the development one and weak ones', () => {
    expect(fails({ NODE_ENV: 'production' })).toMatch(/PLUMBLINE_JWT_SECRET is required/);
    expect(fails({ NODE_ENV: 'production', PLUMBLINE_JWT_SECRET: DEV_JWT_SECRET })).toMatch(
      /PLUMBLINE_JWT_SECRET is the development secret/,
    );
    expect(fails({ NODE_ENV: 'production', PLUMBLINE_JWT_SECRET: randomBytes(16).toString('hex') })).toMatch(
      /at least 32 random bytes/,
    );
    expect(fails({ NODE_ENV: 'production', PLUMBLINE_JWT_SECRET: 'a'.repeat(64) })).toMatch(/does not look random/);
    expect(
      fails({ NODE_ENV: 'production', PLUMBLINE_JWT_SECRET: 'correct horse battery staple and then some more words' }),
    ).toMatch(/hex or base64/);
    const secret = goodSecret();
    const c = loadConfig({ NODE_ENV: 'production', PLUMBLINE_JWT_SECRET: secret });
    expect(c.jwtSecret).toBe(secret);
    expect(c.devOutbox).toBe(false);
  });

  it('accepts the output of openssl rand -hex 32 and -base64 32, and base64url', () => {
    for (let i = 0; i < 20; i++) {
      const b = randomBytes(32);
      expect(jwtSecretProblem(b.toString('hex'))).toBeNull();
      expect(jwtSecretProblem(b.toString('base64'))).toBeNull();
      expect(jwtSecretProblem(b.toString('base64url'))).toBeNull();
    }
  });
});
