// Stop PostgreSQL under the running server: the API answers 503 with a clear message, /api/health says the database
// is down, and the server recovers by itself when PostgreSQL is back. Uses its own throwaway cluster and a real child server.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { ServerProcess } from '../helpers/childServer';
import { createPreparedCluster, freePort, type ThrowawayCluster } from '../helpers/throwawayPg';

let cluster: ThrowawayCluster;
let server: ServerProcess;

beforeAll(async () => {
  cluster = await createPreparedCluster();
  server = new ServerProcess(await freePort(3800, 100), { ...cluster.env(), PLUMBLINE_BCRYPT_COST: '4' });
  await server.start();
}, 180_000);

afterAll(async () => {
  await server?.kill('SIGTERM');
  cluster?.destroy();
});

const waitFor = async (what: string, ok: () => Promise<boolean>, timeoutMs: number) => {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    if (await ok().catch(() => false)) return;
    await new Promise((r) => setTimeout(r, 250));
  }
  throw new Error(`timed out waiting for ${what}:\n${server.output.slice(-3000)}`);
};

describe('PostgreSQL outage', () => {
  it('answers 503 while the database is down and recovers by itself when it returns', async () => {
    const login = await server.login('admin@demo.test', DEMO_PASSWORD);
    expect(login.status).toBe(200);
    const auth = { Authorization: `Bearer ${login.token}` };
    expect((await server.fetchJson('/api/users', { headers: auth })).status).toBe(200);
    expect(await server.health()).toMatchObject({ status: 200, body: { status: 'ok', database: 'up' } });

    // Immediate stop: the pooled connections die without goodbye, as in a crash or a network cut.
    cluster.stop('immediate');

    const seen: string[] = [];
    for (let i = 0; i < 3; i++) {
      const started = Date.now();
      const users = await server.fetchJson('/api/users', { headers: auth });
      const signIn = await server.login('steward@demo.test', DEMO_PASSWORD);
      const audit = await server.fetchJson('/api/audit/verify', { headers: auth });
      const health = await server.health();
      seen.push(`${users.status}/${signIn.status}/${audit.status}/${health.status}`);
      for (const r of [users, signIn, audit]) {
        expect(r.status, JSON.stringify(r.body)).toBe(503);
        expect(r.body.error).toMatch(/database is unavailable/);
      }
      expect(health).toEqual({ status: 503, body: { status: 'degraded', database: 'down', queue: null } });
      // A refused connection must fail fast rather than hang the request (a refused connect is not the pool's 10 s wait for a slot).
      expect(Date.now() - started).toBeLessThan(15_000);
    }
    expect(server.alive, server.output.slice(-2000)).toBe(true);
    expect(server.output).not.toMatch(/Error: .*\n\s+at .*\n[\s\S]*process exited/);

    cluster.start();
    await waitFor('health to say up', async () => (await server.health()).status === 200, 30_000);
    expect(await server.health()).toMatchObject({ status: 200, body: { status: 'ok', database: 'up' } });
    expect((await server.fetchJson('/api/users', { headers: auth })).status).toBe(200);
    const again = await server.login('steward@demo.test', DEMO_PASSWORD);
    expect(again.status).toBe(200);
    expect(server.alive).toBe(true);
    console.log(`outage statuses (users/login/audit/health): ${seen.join(' ')}; recovered`);
  });
});
