// The production build (npm run build → dist/server) started with node, as `npm run start:prod` does: it refuses a
// missing, development or weak signing secret and a database with demo accounts; a good start migrates an empty
// database, serves the client, seeds nothing, connects as a runtime role that is not a superuser, and its compiled
// worker threads work (an upload is screened and checked, its rows browsed and a run computed in them).
import { execFileSync, spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { config, DEV_JWT_SECRET } from '../../server/src/platform/config';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { repoRoot } from '../helpers/childServer';
import { FIXTURE_MODEL } from '../helpers/fixtures';
import { ownerQuery, useDatabase } from '../helpers/api';
import { freePort } from '../helpers/throwawayPg';

useDatabase();

const tag = `${Date.now().toString(36)}${randomBytes(3).toString('hex')}`;
const database = `plumbline_prod_${tag}`;
const appRole = `plumbline_prod_app_${tag}`;
const secret = randomBytes(32).toString('base64');
const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-prod-'));
let port = 0;

/** The environment of a production start: no vitest variables, the test cluster, a database of its own. */
function prodEnv(extra: Record<string, string | undefined>): NodeJS.ProcessEnv {
  const env: NodeJS.ProcessEnv = {};
  for (const [k, v] of Object.entries(process.env))
    if (!k.startsWith('VITEST') && k !== 'NODE_ENV' && !k.startsWith('PLUMBLINE_')) env[k] = v;
  return {
    ...env,
    NODE_ENV: 'production',
    PORT: String(port),
    PGDATABASE: database,
    PLUMBLINE_DB_APP_USER: appRole,
    PLUMBLINE_DB_APP_PASSWORD: randomBytes(18).toString('base64url'),
    PLUMBLINE_BCRYPT_COST: '10',
    PLUMBLINE_MAIL_SENDER: 'off',
    PLUMBLINE_UPLOAD_DIR: path.join(tmp, 'uploads'),
    ...extra,
  };
}

/** `node dist/server/index.js` (the start:prod script) until it exits by itself (a refusal) or answers /api/health. */
async function startProd(
  extra: Record<string, string | undefined>,
): Promise<{ child: ChildProcess; output: () => string; exitCode: number | null }> {
  const child = spawn(process.execPath, ['dist/server/index.js'], {
    cwd: repoRoot,
    env: prodEnv(extra),
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  let out = '';
  child.stdout!.on('data', (d) => (out += d));
  child.stderr!.on('data', (d) => (out += d));
  const exited = new Promise<number | null>((resolve) => child.once('exit', (code) => resolve(code)));
  const deadline = Date.now() + 90_000;
  while (Date.now() < deadline) {
    if (child.exitCode !== null) break;
    const ok = await fetch(`http://127.0.0.1:${port}/api/health`).then(
      (r) => r.status === 200,
      () => false,
    );
    if (ok) return { child, output: () => out, exitCode: null };
    await Promise.race([new Promise((r) => setTimeout(r, 250)), exited]);
  }
  if (child.exitCode === null) {
    child.kill('SIGKILL');
    throw new Error(`the production server neither started nor refused:\n${out}`);
  }
  return { child, output: () => out, exitCode: child.exitCode };
}

async function stop(child: ChildProcess): Promise<void> {
  if (child.exitCode !== null) return;
  const exited = new Promise((r) => child.once('exit', r));
  child.kill('SIGTERM');
  await exited;
}

/** The API's JSON, read as loosely as supertest's `res.body` in the other API tests. */
// eslint-disable-next-line @typescript-eslint/no-explicit-any -- the test walks deep into runs and uploads; a wrong shape fails its expect
type Json = Record<string, any>;

const api = async (p: string, init: RequestInit & { token?: string } = {}) => {
  const headers: Record<string, string> = { ...(init.headers as Record<string, string>) };
  if (init.token) headers.Authorization = `Bearer ${init.token}`;
  if (typeof init.body === 'string') headers['Content-Type'] = 'application/json';
  const res = await fetch(`http://127.0.0.1:${port}${p}`, { ...init, headers });
  return { status: res.status, body: (await res.json().catch(() => ({}))) as Json };
};

beforeAll(async () => {
  // Compile the current sources (the client too, when no build is there yet), as `npm run build` does.
  if (!existsSync(path.join(repoRoot, 'dist/client/index.html')))
    execFileSync('npx', ['vite', 'build', '--logLevel', 'warn'], { cwd: repoRoot, stdio: 'inherit' });
  execFileSync(process.execPath, ['server/scripts/build-server.mjs'], { cwd: repoRoot, stdio: 'inherit' });
  port = await freePort(3300, 600);
  await ownerQuery(`CREATE DATABASE ${database}`);
}, 240_000);

afterAll(async () => {
  await ownerQuery(`DROP DATABASE IF EXISTS ${database} WITH (FORCE)`);
  await ownerQuery(`DROP ROLE IF EXISTS ${appRole}`);
  rmSync(tmp, { recursive: true, force: true });
});

describe('the production start (node dist/server/index.js)', () => {
  it('refuses to start without a signing secret, with the development one, or with a weak one', async () => {
    for (const [value, message] of [
      [undefined, /PLUMBLINE_JWT_SECRET is required in production/],
      [DEV_JWT_SECRET, /PLUMBLINE_JWT_SECRET is the development secret/],
      [
        'short-but-not-random',
        /PLUMBLINE_JWT_SECRET must be hex or base64|PLUMBLINE_JWT_SECRET must encode at least 32/,
      ],
    ] as const) {
      const r = await startProd({ PLUMBLINE_JWT_SECRET: value });
      expect(r.exitCode, r.output()).not.toBe(0);
      expect(r.exitCode).not.toBeNull();
      expect(r.output()).toMatch(message);
    }
    const bad = await startProd({ PLUMBLINE_JWT_SECRET: secret, PORT: 'abc' });
    expect(bad.exitCode).not.toBe(0);
    expect(bad.output()).toMatch(/PORT="abc"/);
  });

  it('on an empty database: migrates, serves the client, seeds nothing, and its sessions are not superusers', async () => {
    const r = await startProd({ PLUMBLINE_JWT_SECRET: secret });
    expect(r.exitCode, r.output()).toBeNull();
    try {
      const page = await fetch(`http://127.0.0.1:${port}/`);
      expect(page.status).toBe(200);
      expect(await page.text()).toMatch(/<div id="app">/);
      expect(page.headers.get('content-type')).toMatch(/text\/html/);
      const sessions: { usename: string; usesuper: boolean }[] = await ownerQuery(
        `SELECT a.usename, u.usesuper FROM pg_stat_activity a JOIN pg_user u ON u.usename = a.usename WHERE a.datname = $1`,
        [database],
      );
      expect(sessions.length).toBeGreaterThan(0);
      for (const s of sessions) expect(s).toEqual({ usename: appRole, usesuper: false });
      expect(psql('SELECT count(*) FROM users')).toBe('0');
      expect(psql('SELECT count(*) FROM scores')).toBe('0');
      expect(psql('SELECT count(*) FROM validation_runs')).toBe('0');
      expect(psql(`SELECT count(*) FROM audit_log WHERE action = 'demo.seeded'`)).toBe('0');
      expect(psql(`SELECT count(*) FROM pg_tables WHERE schemaname = 'public' AND tableowner = '${appRole}'`)).toBe(
        '0',
      );
      expect(
        (
          await api('/api/auth/login', {
            method: 'POST',
            body: JSON.stringify({ email: 'admin@demo.test', password: 'plumbline-demo-2026' }),
          })
        ).status,
      ).toBe(401);
    } finally {
      await stop(r.child);
    }
  });

  it('admin:create makes the first admin from a password on stdin (never an argument); the compiled workers check an upload', async () => {
    const password = `first-admin-${randomBytes(6).toString('hex')}`;
    const made = spawnSync(
      process.execPath,
      ['dist/server/create-admin.js', '--email', 'quality.lead@hospital.example', '--name', 'Quality Lead'],
      {
        cwd: repoRoot,
        env: prodEnv({ PLUMBLINE_JWT_SECRET: secret }),
        input: `${password}\n`,
        encoding: 'utf8',
        timeout: 120_000,
      },
    );
    expect(made.status, made.stderr + made.stdout).toBe(0);
    const asArgument = spawnSync(
      process.execPath,
      ['dist/server/create-admin.js', '--email', 'x@hospital.example', '--name', 'X', '--password', password],
      {
        cwd: repoRoot,
        env: prodEnv({ PLUMBLINE_JWT_SECRET: secret }),
        input: '',
        encoding: 'utf8',
        timeout: 60_000,
      },
    );
    expect(asArgument.status).toBe(2);
    expect(asArgument.stderr).toMatch(/Unknown option '--password'/);

    const r = await startProd({ PLUMBLINE_JWT_SECRET: secret });
    expect(r.exitCode, r.output()).toBeNull();
    try {
      const admin = await api('/api/auth/login', {
        method: 'POST',
        body: JSON.stringify({ email: 'quality.lead@hospital.example', password }),
      });
      expect(admin.status).toBe(200);
      const stewardPassword = `steward-${randomBytes(6).toString('hex')}`;
      const steward = await api('/api/users', {
        method: 'POST',
        token: admin.body.token,
        body: JSON.stringify({
          email: 'steward@hospital.example',
          name: 'Data Steward',
          role: 'steward',
          password: stewardPassword,
        }),
      });
      expect(steward.status).toBe(201);
      expect((await api('/api/dev/outbox', { token: admin.body.token })).status).toBe(404); // the development outbox is off
      // A score version straight into the database (as its owner): this test is about the build, not the registry.
      psql(`INSERT INTO scores (name, outcome_definition, time_horizon, intended_population, citation, caution_text)
            VALUES ('Build check score', 'readmission', '30 days', 'adults', 'invented', 'invented')`);
      const versionId = psql(
        `INSERT INTO score_versions (score_id, version, mode, model) SELECT id, 1, 'formula', '${JSON.stringify(FIXTURE_MODEL)}'::jsonb FROM scores WHERE name = 'Build check score' RETURNING id`,
      );
      const token = (
        await api('/api/auth/login', {
          method: 'POST',
          body: JSON.stringify({ email: 'steward@hospital.example', password: stewardPassword }),
        })
      ).body.token;
      const csv = path.join(tmp, 'quarter.csv');
      writeFileSync(
        csv,
        `${[...kestrelQuarterCsv({ year: 2025, quarter: 2, index: 5, n: 300, seed: 11 })].join('\n')}\n`,
      );
      const form = new FormData();
      form.set('scoreVersionId', versionId);
      form.set('cohortName', 'Build check cohort');
      form.set('file', new Blob([readFileSync(csv)]), 'quarter.csv');
      const up = await fetch(`http://127.0.0.1:${port}/api/cohorts`, {
        method: 'POST',
        headers: { Authorization: `Bearer ${token}` },
        body: form,
      });
      const upBody = (await up.json()) as { upload: { id: string } };
      expect(up.status, JSON.stringify(upBody)).toBe(201);
      const mapped = await api(`/api/uploads/${upBody.upload.id}/mapping`, {
        method: 'POST',
        token,
        body: JSON.stringify({ mapping: KESTREL_MAPPING }),
      });
      expect(mapped.status, JSON.stringify(mapped.body)).toBe(202);
      let upload: Json = {};
      for (const until = Date.now() + 90_000; Date.now() < until; await new Promise((res) => setTimeout(res, 300))) {
        upload = (await api(`/api/uploads/${upBody.upload.id}`, { token })).body.upload;
        if (upload.status !== 'processing') break;
      }
      expect(upload.status, JSON.stringify(upload)).toBe('checked');
      expect(upload.rowsAccepted).toBeGreaterThan(250);
      // The other pools of the compiled task module: the row browser, a run, and its adequacy widths.
      const commit = await api(`/api/uploads/${upBody.upload.id}/commit`, {
        method: 'POST',
        token,
        body: JSON.stringify({ excludeRejected: true }),
      });
      expect(commit.status, JSON.stringify(commit.body)).toBe(201);
      const rows = await api(
        `/api/cohorts/${commit.body.cohortId}/versions/1/rows?page=1&pageSize=5&sortBy=line_no&sortDir=desc`,
        { token },
      );
      expect(rows.status, JSON.stringify(rows.body)).toBe(200);
      expect(rows.body.rows).toHaveLength(5);
      expect(rows.body.total).toBe(upload.rowsAccepted);
      const queued = await api('/api/runs', {
        method: 'POST',
        token,
        body: JSON.stringify({ scoreVersionId: versionId, cohortVersionId: commit.body.cohortVersionId }),
      });
      expect(queued.status, JSON.stringify(queued.body)).toBe(201);
      let run: Json = {};
      for (const until = Date.now() + 120_000; Date.now() < until; await new Promise((res) => setTimeout(res, 300))) {
        run = (await api(`/api/runs/${queued.body.run.id}`, { token })).body.run;
        if (run.status !== 'queued' && run.status !== 'running') break;
      }
      expect(run.status, `${JSON.stringify(run.error ?? run.status)}\n${r.output().slice(-3000)}`).toBe('completed');
      expect(run.results.overall.n).toBe(upload.rowsAccepted);
      expect(run.adequacy.precision.oe).toBeGreaterThan(0);
    } finally {
      await stop(r.child);
    }
  }, 360_000);

  it('refuses to start on a database that holds a demo account', async () => {
    psql(
      `INSERT INTO users (email, name, role, password_hash) VALUES ('chair@demo.test', 'Demo Chair', 'chair', '$2a$10$abcdefghijklmnopqrstuuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ01')`,
    );
    const r = await startProd({ PLUMBLINE_JWT_SECRET: secret });
    expect(r.exitCode, r.output()).not.toBeNull();
    expect(r.exitCode).not.toBe(0);
    expect(r.output()).toMatch(/refuses to start: the database holds demo accounts \(chair@demo\.test\)/);
  });
});

/** One statement on the production test database as the owner (psql, so no second pool is kept open). */
function psql(sql: string): string {
  const { host, port: pgPort, user } = config.dbOwner;
  const out = execFileSync(
    'psql',
    ['-h', host, '-p', String(pgPort), '-U', user, '-tAq', '-v', 'ON_ERROR_STOP=1', '-c', sql, database],
    { encoding: 'utf8' },
  );
  return out.trim().split('\n')[0];
}
