// Request logs, request ids, metrics and the health report: one JSON log line per API request with its id, no secret
// in any line, Prometheus figures per route pattern, and the shared queue in /api/health.
// Common practice, no source: pino's redaction and prom-client's text format are the libraries' own.
import { Writable } from 'node:stream';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApp } from '../../server/src/http/app';
import { config } from '../../server/src/platform/config';
import { createLogger } from '../../server/src/platform/observability/log';
import { startProcessMetrics } from '../../server/src/platform/observability/metrics';
import { bearer, dataSource, DEMO_PASSWORD, demoEmail, tokenFor, useDatabase } from '../helpers/api';
import { createCohortFixture, createScoreFixture, kestrelRows } from '../helpers/fixtures';

useDatabase();

const lines: string[] = [];
const sink = new Writable({
  write(chunk, _enc, done) {
    lines.push(...String(chunk).split('\n').filter(Boolean));
    done();
  },
});
const logged = createApp({ serveClient: false, log: createLogger(sink, 'info') });
type LogLine = { req?: { id?: string; url?: string; headers: Record<string, string> } } & Record<string, unknown>;
const entries = () => lines.map((l) => JSON.parse(l) as LogLine);

beforeAll(() => startProcessMetrics());

describe('request logs', () => {
  it('writes one JSON line per request with the request id the answer carries', async () => {
    const res = await request(logged).get('/api/health');
    expect(res.headers['x-request-id']).toMatch(/^[0-9a-f-]{36}$/);
    const line = entries().find((e) => e.req?.id === res.headers['x-request-id']);
    expect(line).toMatchObject({
      level: 30,
      service: 'plumbline',
      req: { method: 'GET', url: '/api/health' },
      res: { statusCode: 200 },
    });
    expect(typeof line!.responseTime).toBe('number');
  });

  it('keeps a request id given by the proxy, and refuses one that does not look like an id', async () => {
    const kept = await request(logged).get('/api/health').set('X-Request-Id', 'proxy-id-12345678');
    expect(kept.headers['x-request-id']).toBe('proxy-id-12345678');
    const odd = await request(logged).get('/api/health').set('X-Request-Id', 'bad id <script>');
    expect(odd.headers['x-request-id']).toMatch(/^[0-9a-f-]{36}$/);
  });

  it('never writes a token, a cookie, a password or a query string', async () => {
    lines.length = 0;
    const password = DEMO_PASSWORD;
    const login = await request(logged)
      .post('/api/auth/login')
      .set('Cookie', 'session=cookie-secret-123')
      .send({ email: demoEmail('admin'), password });
    expect(login.status).toBe(200);
    const token = login.body.token as string;
    const read = await request(logged)
      .get('/api/cohorts?search=Secret%20Ward')
      .set(bearer(token))
      .set('Proxy-Authorization', 'Basic cHJveHk6c2VjcmV0');
    expect(read.status).toBe(200);
    createLogger(sink, 'info').info(
      { body: { password, newPassword: password }, user: { form: { currentPassword: password } } },
      'a handler logged a body',
    );
    const text = lines.join('\n');
    expect(lines.length).toBeGreaterThanOrEqual(3);
    for (const secret of [token, token.split('.')[2], password, 'cookie-secret-123', 'cHJveHk6c2VjcmV0', 'Secret'])
      expect(text).not.toContain(secret);
    const readLine = entries().find((e) => e.req?.id === read.headers['x-request-id']);
    expect(readLine?.req?.headers.authorization).toBe('[redacted]');
    expect(readLine?.req?.url).toBe('/api/cohorts');
    expect(entries().find((e) => e.req?.id === login.headers['x-request-id'])?.req?.headers.cookie).toBe('[redacted]');
  });
});

describe('GET /api/metrics', () => {
  it('reports request durations by route pattern, queue depth and event-loop delay', async () => {
    const score = await createScoreFixture({ name: `Metrics score ${Date.now()}` });
    expect(
      (
        await request(logged)
          .get(`/api/scores/${score.scoreId}`)
          .set(bearer(await tokenFor('statistician')))
      ).status,
    ).toBe(200);
    const res = await request(logged).get('/api/metrics');
    expect(res.status).toBe(200);
    expect(res.headers['content-type']).toMatch(/^text\/plain/);
    expect(res.text).toMatch(
      /plumbline_http_request_duration_seconds_count\{method="GET",route="\/api\/scores\/:id",status="200"\} [1-9]/,
    );
    expect(res.text).not.toContain(score.scoreId);
    expect(res.text).toMatch(/plumbline_queue_depth\{queue="runs",state="queued"\} \d+/);
    expect(res.text).toMatch(/nodejs_eventloop_lag_p99_seconds \d/);
    expect(res.text).toContain('# TYPE plumbline_job_duration_seconds histogram');
  });

  it('needs the scrape token when one is set', async () => {
    const before = config.metricsToken;
    config.metricsToken = 'scrape-token-for-test';
    try {
      expect((await request(logged).get('/api/metrics')).status).toBe(401);
      expect((await request(logged).get('/api/metrics').set(bearer('wrong'))).status).toBe(401);
      expect((await request(logged).get('/api/metrics').set(bearer('scrape-token-for-test'))).status).toBe(200);
    } finally {
      config.metricsToken = before;
    }
  });
});

describe('GET /api/health', () => {
  let queuedId: string | undefined;
  afterAll(async () => {
    if (queuedId)
      await dataSource.query(
        `UPDATE validation_runs SET status = 'failed', error = 'test fixture', finished_at = now() WHERE id = $1`,
        [queuedId],
      );
  });

  it('reports the shared run queue as the database holds it', async () => {
    const before = (await request(logged).get('/api/health')).body;
    expect(before).toMatchObject({
      status: 'ok',
      database: 'up',
      queue: {
        runs: { queued: expect.any(Number), running: expect.any(Number) },
        uploadChecks: { running: expect.any(Number) },
        mail: { pending: expect.any(Number) },
      },
    });
    const score = await createScoreFixture({ name: `Health score ${Date.now()}` });
    const { cohortVersionId } = await createCohortFixture(kestrelRows(20, 5), { label: 'health queue' });
    const rows: { id: string }[] = await dataSource.query(
      `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress) VALUES ($1, $2, '{}'::jsonb, 'queued', 0) RETURNING id`,
      [score.scoreVersionId, cohortVersionId],
    );
    queuedId = rows[0].id;
    const after = (await request(logged).get('/api/health')).body;
    expect(after.queue.runs.queued).toBe(before.queue.runs.queued + 1);
  });
});
