// Several processes on one database: two API processes with PLUMBLINE_JOBS=off and one jobs-only worker
// (`server/src/worker.ts`), all real child processes on a throwaway PostgreSQL cluster. A change made through one API
// process shows on the very next read through the other; an account deactivated through one is refused by the other
// at once; uploads are checked and runs computed by the worker; a worker killed with SIGKILL in the middle of a run is
// replaced, and the run completes exactly once, with one result (pg-boss retries the job once after its expiry).
import path from 'node:path';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { ServerProcess } from '../helpers/childServer';
import { createPreparedCluster, freePort, insertFixtureScore, type ThrowawayCluster } from '../helpers/throwawayPg';
import { until as waitUntil } from '../helpers/until';

// Three servers and a bootstrap run on a shared 2-core machine: minutes, not the suite's default two.
vi.setConfig({ testTimeout: 600_000 });

let cluster: ThrowawayCluster;
let apiA: ServerProcess;
let apiB: ServerProcess;
let worker: ServerProcess;
const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-topology-'));
const sql = (q: string) => cluster.psql(q);
const num = (q: string) => Number(sql(q));
let scoreVersionId = '';
let cohortVersionId = '';
let workerEnv: Record<string, string>;

const until = <T>(what: string, get: () => Promise<T> | T, ok: (v: T) => boolean, timeoutMs: number, stepMs = 200) =>
  waitUntil(what, get, ok, timeoutMs, stepMs, () => `worker:\n${worker?.output.slice(-2000)}`);

const token = (server: ServerProcess, email: string, password = DEMO_PASSWORD) => server.bearer(email, password);
const json = (h: Record<string, string>, body: unknown): RequestInit => ({
  method: 'POST',
  headers: { ...h, 'Content-Type': 'application/json' },
  body: JSON.stringify(body),
});

beforeAll(async () => {
  cluster = await createPreparedCluster();
  scoreVersionId = insertFixtureScore(cluster, 'Topology score');
  const common = {
    ...cluster.env(),
    PLUMBLINE_BCRYPT_COST: '4',
    PLUMBLINE_UPLOAD_DIR: path.join(tmp, 'uploads'),
    PLUMBLINE_DB_POOL: '5',
    // A claimed job whose process died is given to another process after this long.
    PLUMBLINE_JOB_EXPIRE_SECONDS: '30',
    PLUMBLINE_MAIL_SENDER: 'off',
    PLUMBLINE_LOG_LEVEL: 'info',
  };
  workerEnv = common;
  apiA = new ServerProcess(await freePort(3900, 50), { ...common, PLUMBLINE_JOBS: 'off' });
  await apiA.start(120_000);
  apiB = new ServerProcess(await freePort(3950, 50), { ...common, PLUMBLINE_JOBS: 'off' });
  await apiB.start(120_000);
  worker = new ServerProcess(await freePort(3990, 10), workerEnv, 'server/src/worker.ts'); // the port is only a setting: a worker serves no HTTP
  await worker.start(120_000);
}, 600_000);

afterAll(async () => {
  await Promise.all([apiA?.kill('SIGKILL'), apiB?.kill('SIGKILL'), worker?.kill('SIGKILL')]);
  cluster?.destroy();
  rmSync(tmp, { recursive: true, force: true });
});

describe('two API processes (jobs off) and one worker on one database', () => {
  it('an upload received by A, mapped through B, is checked by the worker; once stored through B, A lists it at once', async () => {
    const stewardA = await token(apiA, 'steward@demo.test');
    const stewardB = await token(apiB, 'steward@demo.test');
    const form = new FormData();
    form.set('scoreVersionId', scoreVersionId);
    form.set('cohortName', 'Topology cohort (invented data)');
    const csv = [...kestrelQuarterCsv({ year: 2025, quarter: 2, index: 5, n: 4000, seed: 515151 })].join('\n');
    form.set('file', new Blob([csv], { type: 'text/csv' }), 'topology.csv');
    const created = await apiA.fetchJson('/api/cohorts', { method: 'POST', headers: stewardA, body: form }, 120_000);
    expect(created.status, JSON.stringify(created.body)).toBe(201);
    const uploadId = (created.body.upload as { id: string }).id;
    const mapped = await apiB.fetchJson(
      `/api/uploads/${uploadId}/mapping`,
      json(stewardB, { mapping: KESTREL_MAPPING }),
    );
    expect(mapped.status, JSON.stringify(mapped.body)).toBeLessThan(300);
    // Neither API process runs jobs: the check is the worker's.
    const checked = await until(
      'the worker to check the upload',
      async () =>
        (await apiA.fetchJson(`/api/uploads/${uploadId}`, { headers: stewardA })).body.upload as {
          status: string;
          rowsAccepted: number;
        },
      (u) => u?.status !== 'processing',
      300_000,
    );
    expect(checked.status).toBe('checked');
    expect(checked.rowsAccepted).toBeGreaterThan(3000);
    expect(
      num(
        `SELECT count(*) FROM pgboss.job WHERE name = 'upload-check' AND state = 'completed' AND data->>'uploadId' = '${uploadId}'`,
      ),
    ).toBe(1);

    const listedBefore = await apiA.fetchJson('/api/cohorts', { headers: stewardA });
    expect(JSON.stringify(listedBefore.body)).not.toContain('Topology cohort');
    const stored = await apiB.fetchJson(`/api/uploads/${uploadId}/commit`, json(stewardB, { excludeRejected: true }));
    expect(stored.status, JSON.stringify(stored.body)).toBe(201);
    cohortVersionId = String(stored.body.cohortVersionId);
    const listed = await apiA.fetchJson('/api/cohorts', { headers: stewardA });
    expect(listed.status).toBe(200);
    expect(JSON.stringify(listed.body)).toContain('Topology cohort (invented data)');
  });

  let runId = '';
  it('a run queued through A completes in the worker, and B shows it completed on the next read', async () => {
    const statA = await token(apiA, 'statistician@demo.test');
    const statB = await token(apiB, 'statistician@demo.test');
    const created = await apiA.fetchJson('/api/runs', json(statA, { scoreVersionId, cohortVersionId }));
    expect(created.status, JSON.stringify(created.body)).toBe(201);
    runId = (created.body.run as { id: string }).id;
    const done = await until(
      'the worker to complete the run',
      async () => (await apiB.fetchJson(`/api/runs/${runId}`, { headers: statB })).body.run as { status: string },
      (r) => r?.status === 'completed' || r?.status === 'failed',
      300_000,
    );
    expect(done.status).toBe('completed');
    const viaA = (await apiA.fetchJson(`/api/runs/${runId}`, { headers: statA })).body.run as {
      status: string;
      resultsSha256: string;
    };
    expect(viaA.status).toBe('completed');
    expect(viaA.resultsSha256).toMatch(/^[0-9a-f]{64}$/);
    // The drift rules of the score were evaluated as a job of their own, enqueued with the completed run.
    await until(
      'the drift-rule job',
      () =>
        num(
          `SELECT count(*) FROM pgboss.job WHERE name = 'drift-rules' AND state = 'completed' AND data->>'runId' = '${runId}'`,
        ),
      (n) => n === 1,
      120_000,
    );
  });

  it('score cards: an approval through A shows through B, and a revocation through B is gone from A at once', async () => {
    expect(runId).toMatch(/^[0-9a-f-]{36}$/);
    const statA = await token(apiA, 'statistician@demo.test');
    const chairA = await token(apiA, 'chair@demo.test');
    const chairB = await token(apiB, 'chair@demo.test');
    const clinA = await token(apiA, 'clinician@demo.test');
    const clinB = await token(apiB, 'clinician@demo.test');
    expect(
      (
        await apiA.fetchJson(
          `/api/runs/${runId}/review`,
          json(statA, { verdict: 'fit for use', reasoning: 'Invented data; the figures look fine.' }),
        )
      ).status,
    ).toBeLessThan(300);
    const signed = await apiA.fetchJson(
      `/api/runs/${runId}/signoff`,
      json(chairA, { decision: 'approve', password: DEMO_PASSWORD }),
    );
    expect(signed.status, JSON.stringify(signed.body)).toBeLessThan(300);
    const cards = async (server: ServerProcess, h: Record<string, string>) =>
      JSON.stringify((await server.fetchJson('/api/scorecards', { headers: h })).body);
    expect(await cards(apiB, clinB)).toContain(scoreVersionId);
    const revoked = await apiB.fetchJson(
      `/api/score-versions/${scoreVersionId}/revoke`,
      json(chairB, { password: DEMO_PASSWORD, reason: 'Checking several processes (invented).' }),
    );
    expect(revoked.status, JSON.stringify(revoked.body)).toBeLessThan(300);
    expect(await cards(apiA, clinA)).not.toContain(scoreVersionId);
  });

  it('an account deactivated through A is refused by B on its next request', async () => {
    const adminA = await token(apiA, 'admin@demo.test');
    const email = `topology-${Date.now()}@hospital.example`;
    const created = await apiA.fetchJson(
      '/api/users',
      json(adminA, { email, name: 'Topology Steward', role: 'steward', password: 'a-long-password-1' }),
    );
    expect(created.status, JSON.stringify(created.body)).toBe(201);
    const id = (created.body.user as { id: string }).id;
    const userB = await token(apiB, email, 'a-long-password-1');
    expect((await apiB.fetchJson('/api/auth/me', { headers: userB })).status).toBe(200);
    const patched = await apiA.fetchJson(`/api/users/${id}`, {
      method: 'PATCH',
      headers: { ...adminA, 'Content-Type': 'application/json' },
      body: JSON.stringify({ active: false }),
    });
    expect(patched.status).toBe(200);
    expect((await apiB.fetchJson('/api/auth/me', { headers: userB })).status).toBe(401);
  });

  it('a worker killed with SIGKILL in the middle of a run is replaced, and the run completes exactly once', async () => {
    const statA = await token(apiA, 'statistician@demo.test');
    // A bootstrap of 2,000 replicates keeps the run busy long enough to be cut off in the middle.
    const created = await apiA.fetchJson(
      '/api/runs',
      json(statA, { scoreVersionId, cohortVersionId, settings: { bootstrapReplicates: 2000 } }),
    );
    expect(created.status, JSON.stringify(created.body)).toBe(201);
    const id = (created.body.run as { id: string }).id;
    await until(
      'the run to be under way in the worker',
      () => sql(`SELECT status || ' ' || (progress > 0) FROM validation_runs WHERE id = '${id}'`),
      (s) => s === 'running true' || s.startsWith('completed'),
      300_000,
      50,
    );
    const atKill = sql(
      `SELECT status || ' ' || round(progress::numeric, 2) || ' ' || coalesce(progress_message, '') FROM validation_runs WHERE id = '${id}'`,
    );
    await worker.kill('SIGKILL');
    console.log(`run at kill: ${atKill}`);
    expect(atKill.startsWith('running'), `the run finished before the kill (${atKill})`).toBe(true);
    expect(sql(`SELECT state FROM pgboss.job WHERE name = 'run' AND data->>'runId' = '${id}'`)).toBe('active');

    // The API processes never take the run over; a new worker gets the job once its claim has expired.
    worker = new ServerProcess(await freePort(3990, 10), workerEnv, 'server/src/worker.ts'); // the port is only a setting: a worker serves no HTTP
    await worker.start(120_000);
    const final = await until(
      'the replaced worker to finish the run',
      () => sql(`SELECT status FROM validation_runs WHERE id = '${id}'`),
      (s) => s === 'completed' || s === 'failed',
      600_000,
      500,
    );
    expect(final).toBe('completed');
    expect(num(`SELECT attempt FROM validation_runs WHERE id = '${id}'`)).toBe(2);
    expect(num(`SELECT count(*) FROM audit_log WHERE target_id = '${id}' AND action = 'run.completed'`)).toBe(1);
    expect(num(`SELECT count(*) FROM audit_log WHERE target_id = '${id}' AND action = 'run.requeued'`)).toBe(1);
    expect(num(`SELECT count(*) FROM validation_runs WHERE id = '${id}' AND results_sha256 IS NOT NULL`)).toBe(1);
    // One job, retried once: pg-boss's record of it.
    expect(
      sql(`SELECT count(*) || ' ' || max(retry_count) FROM pgboss.job WHERE name = 'run' AND data->>'runId' = '${id}'`),
    ).toBe('1 1');
    const chain = await apiB.fetchJson('/api/audit/verify', { headers: await token(apiB, 'admin@demo.test') });
    expect(chain.body.ok).toBe(true);
  });
});
