// Crash safety with a real child server and SIGKILL, on a throwaway PostgreSQL cluster:
//  - killed in the middle of checking a large cohort upload (while the check thread's COPY streams rows into
//    cohort_row_blocks): no partial cohort and no staged row afterwards; after restart the check's job is retried
//    (pg-boss, once its claim expires) and the file is checked again from the start;
//  - killed between the check and storing: the checked upload survives whole and is stored once after restart;
//  - killed in the middle of a validation run: after restart its job is retried once and the run completes, never stuck;
//  - killed in the middle of a score comparison's bootstrap: the same, for its job;
//  - afterwards the database passes its integrity checks (row counts per version, audit hash chain).
// Row count: PLUMBLINE_CRASH_ROWS (default 1,000,000, as the issue asks).
import { createWriteStream, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { once } from 'node:events';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';

// A million rows on a shared machine: minutes, not the suite's default two.
vi.setConfig({ testTimeout: 600_000 });
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { WREN_V1_MODEL } from '../../server/src/demo/seeds/competingScore';
import { BLOCK_ROWS } from '../../server/src/domain/cohorts/cohortBlocks';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { ServerProcess } from '../helpers/childServer';
import { createPreparedCluster, freePort, insertFixtureScore, type ThrowawayCluster } from '../helpers/throwawayPg';
import { until as waitUntil } from '../helpers/until';

const ROWS = Number(process.env.PLUMBLINE_CRASH_ROWS ?? 1_000_000);
let cluster: ThrowawayCluster;
let server: ServerProcess;
const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-crash-'));
let scoreVersionId = '';
let otherScoreVersionId = '';
const sql = (q: string) => cluster.psql(q);
const num = (q: string) => Number(sql(q));

const until = <T>(what: string, get: () => Promise<T> | T, ok: (v: T) => boolean, timeoutMs: number, stepMs = 100) =>
  waitUntil(what, get, ok, timeoutMs, stepMs, () => server?.output.slice(-2000) ?? '');

async function writeBigCsv(file: string, n: number) {
  const out = createWriteStream(file);
  for (const line of kestrelQuarterCsv({ year: 2025, quarter: 3, index: 6, n, seed: 424242 })) {
    if (!out.write(`${line}\n`)) await once(out, 'drain');
  }
  out.end();
  await once(out, 'finish');
}

function integrity() {
  return {
    // Every stored version holds exactly the rows it says it holds.
    versionsWithWrongCount: num(
      `SELECT count(*) FROM cohort_versions v WHERE v.row_count <> (SELECT coalesce(sum(b.row_count), 0) FROM cohort_row_blocks b WHERE b.cohort_version_id = v.id)`,
    ),
    // No staged row outside a checked upload (a killed check's COPY must leave none).
    strayStagedRows:
      num(`SELECT count(*) FROM cohort_row_blocks b WHERE NOT EXISTS (SELECT 1 FROM cohort_versions v WHERE v.id = b.cohort_version_id)
      AND NOT EXISTS (SELECT 1 FROM cohort_uploads u WHERE u.planned_version_id = b.cohort_version_id AND u.status = 'checked')`),
    // No cohort without a version that a half-done commit could have left.
    cohortsWithoutVersion: num(
      `SELECT count(*) FROM cohorts c WHERE NOT EXISTS (SELECT 1 FROM cohort_versions v WHERE v.cohort_id = c.id)`,
    ),
    committedUploadsWithoutVersion: num(
      `SELECT count(*) FROM cohort_uploads u WHERE u.status = 'committed' AND NOT EXISTS (SELECT 1 FROM cohort_versions v WHERE v.id = u.cohort_version_id)`,
    ),
  };
}

const CLEAN = {
  versionsWithWrongCount: 0,
  strayStagedRows: 0,
  cohortsWithoutVersion: 0,
  committedUploadsWithoutVersion: 0,
};
const stored = () => ({
  cohorts: num('SELECT count(*) FROM cohorts'),
  versions: num('SELECT count(*) FROM cohort_versions'),
  rows: num(
    'SELECT coalesce(sum(b.row_count), 0) FROM cohort_row_blocks b WHERE EXISTS (SELECT 1 FROM cohort_versions v WHERE v.id = b.cohort_version_id)',
  ),
});
/** A checked upload's rows, staged under the id its cohort version will get. */
const staged = (id: string) =>
  num(
    `SELECT coalesce(sum(b.row_count), 0) FROM cohort_row_blocks b JOIN cohort_uploads u ON u.planned_version_id = b.cohort_version_id WHERE u.id = '${id}'`,
  );

beforeAll(async () => {
  cluster = await createPreparedCluster();
  scoreVersionId = insertFixtureScore(cluster, 'Crash test score');
  otherScoreVersionId = insertFixtureScore(cluster, 'Crash test competing score', WREN_V1_MODEL);
  server = new ServerProcess(await freePort(3800, 100), {
    ...cluster.env(),
    PLUMBLINE_BCRYPT_COST: '4',
    PLUMBLINE_UPLOAD_DIR: path.join(tmp, 'uploads'),
    PLUMBLINE_UPLOAD_LIMIT_MB: '512',
    // A claimed job whose process died is retried after this long (the default is an hour).
    PLUMBLINE_JOB_EXPIRE_SECONDS: '120',
  });
  await server.start();
}, 300_000);

afterAll(async () => {
  await server?.kill('SIGKILL');
  cluster?.destroy();
  rmSync(tmp, { recursive: true, force: true });
});

const token = (email: string) => server.bearer(email, DEMO_PASSWORD);

describe(`SIGKILL in the middle of work (${ROWS.toLocaleString('en')} rows)`, () => {
  let uploadId = '';
  let cohortVersionId = '';

  it('checking a large upload: killed while its rows stream in, nothing is left; after restart it is checked again and stored once', async () => {
    const file = path.join(tmp, 'big.csv');
    await writeBigCsv(file, ROWS);
    let steward = await token('steward@demo.test');
    const form = new FormData();
    form.set('scoreVersionId', scoreVersionId);
    form.set('cohortName', 'Crash test cohort (invented data)');
    form.set('file', new Blob([readFileSync(file)], { type: 'text/csv' }), 'big.csv');
    const created = await server.fetchJson('/api/cohorts', { method: 'POST', headers: steward, body: form }, 300_000);
    expect(created.status, JSON.stringify(created.body)).toBe(201);
    uploadId = (created.body.upload as { id: string }).id;
    const before = stored();
    const map = async () => {
      const mapped = await server.fetchJson(`/api/uploads/${uploadId}/mapping`, {
        method: 'POST',
        headers: { ...steward, 'Content-Type': 'application/json' },
        body: JSON.stringify({ mapping: KESTREL_MAPPING }),
      });
      expect(mapped.status, JSON.stringify(mapped.body)).toBeLessThan(300);
    };
    await map();
    const auditBefore = num('SELECT count(*) FROM audit_log');
    // Kill once the check thread's COPY has streamed part of the rows, not before and not after.
    const progress = await until(
      'COPY into cohort_row_blocks to be under way',
      () =>
        num(
          `SELECT coalesce(max(tuples_processed), 0) FROM pg_stat_progress_copy WHERE relid = 'cohort_row_blocks'::regclass`,
        ),
      (n) => n > 0,
      300_000,
      20,
    );
    await server.kill('SIGKILL');
    console.log(
      `killed while COPY had streamed ${progress.toLocaleString('en')} of ${Math.ceil(ROWS / BLOCK_ROWS)} blocks (${BLOCK_ROWS.toLocaleString('en')} rows each)`,
    );
    expect(progress).toBeLessThan(Math.ceil(ROWS / BLOCK_ROWS));

    // PostgreSQL aborts the killed thread's transaction when its socket closes.
    await until(
      'the killed COPY to end',
      () => num(`SELECT count(*) FROM pg_stat_activity WHERE query LIKE 'COPY cohort_row_blocks%' AND state <> 'idle'`),
      (n) => n === 0,
      60_000,
      100,
    );
    expect(stored()).toEqual(before);
    expect(staged(uploadId)).toBe(0);
    expect(integrity()).toEqual(CLEAN);
    expect(num('SELECT count(*) FROM audit_log')).toBe(auditBefore);
    expect(sql(`SELECT status FROM cohort_uploads WHERE id = '${uploadId}'`)).toBe('processing');

    // No start-up recovery takes it: the check's job is retried once its claim expires, and checks the file afresh.
    await server.start();
    steward = await token('steward@demo.test');
    const checked = await until(
      'the retried check',
      async () =>
        (await server.fetchJson(`/api/uploads/${uploadId}`, { headers: steward })).body.upload as {
          status: string;
          rowsAccepted: number;
          rowsRejected: number;
        },
      (u) => u?.status !== 'processing',
      900_000,
      500,
    );
    expect(checked.status).toBe('checked');
    expect(checked.rowsAccepted + checked.rowsRejected).toBe(ROWS);
    expect(staged(uploadId)).toBe(checked.rowsAccepted);
    expect(integrity()).toEqual(CLEAN);

    // Killed between the check and storing: the checked upload is still whole after restart and is stored once.
    await server.kill('SIGKILL');
    await server.start();
    steward = await token('steward@demo.test');
    expect(
      ((await server.fetchJson(`/api/uploads/${uploadId}`, { headers: steward })).body.upload as { status: string })
        .status,
    ).toBe('checked');
    expect(stored()).toEqual(before);
    expect(staged(uploadId)).toBe(checked.rowsAccepted);
    const commit = () =>
      server.fetchJson(`/api/uploads/${uploadId}/commit`, {
        method: 'POST',
        headers: { ...steward, 'Content-Type': 'application/json' },
        body: JSON.stringify({ excludeRejected: true }),
      });
    const [a, b] = await Promise.all([commit(), commit()]);
    expect([a.status, b.status].sort()).toEqual([201, 409]);
    const again = a.status === 201 ? a : b;
    cohortVersionId = String(again.body.cohortVersionId ?? '');
    expect(stored()).toEqual({
      cohorts: before.cohorts + 1,
      versions: before.versions + 1,
      rows: before.rows + checked.rowsAccepted,
    });
    expect(integrity()).toEqual(CLEAN);
  });

  it('a validation run: after SIGKILL and restart its job is retried once and the run completes, never left running', async () => {
    expect(cohortVersionId).toMatch(/^[0-9a-f-]{36}$/);
    const stat = await token('statistician@demo.test');
    const created = await server.fetchJson('/api/runs', {
      method: 'POST',
      headers: { ...stat, 'Content-Type': 'application/json' },
      body: JSON.stringify({ scoreVersionId, cohortVersionId }),
    });
    expect(created.status, JSON.stringify(created.body)).toBeLessThan(300);
    const runId = String((created.body.run as { id?: string } | undefined)?.id ?? created.body.id);
    await until(
      'the run to start',
      () => sql(`SELECT status FROM validation_runs WHERE id = '${runId}'`),
      (s) => s === 'running' || s === 'completed',
      120_000,
      20,
    );
    // Prefer a kill after the first progress write (the computation under way), but do not wait past a few seconds.
    await until(
      'progress',
      () =>
        num(`SELECT CASE WHEN status = 'running' THEN progress ELSE 1 END FROM validation_runs WHERE id = '${runId}'`),
      (p) => p > 0,
      8_000,
      20,
    ).catch(() => undefined);
    const statusAtKill = sql(
      `SELECT status || ' ' || round(progress::numeric, 2) || ' ' || coalesce(progress_message, '') FROM validation_runs WHERE id = '${runId}'`,
    );
    await server.kill('SIGKILL');
    console.log(`run at kill: ${statusAtKill}`);
    expect(
      statusAtKill.startsWith('running'),
      `the run finished before the kill (${statusAtKill}); raise PLUMBLINE_CRASH_ROWS`,
    ).toBe(true);
    expect(sql(`SELECT status FROM validation_runs WHERE id = '${runId}'`)).toBe('running');

    await server.start();
    // The retry comes once the dead process's claim expires (attempt 2), and it is the only one.
    const recovered = await until(
      'the retry',
      () => sql(`SELECT status || ' ' || attempt FROM validation_runs WHERE id = '${runId}'`),
      (s) => !s.startsWith('running 1'),
      600_000,
      200,
    );
    expect(recovered).toMatch(/^(running|completed) 2$/);
    expect(num(`SELECT count(*) FROM audit_log WHERE target_id = '${runId}' AND action = 'run.requeued'`)).toBe(1);
    const final = await until(
      'the resumed run to finish',
      () => sql(`SELECT status FROM validation_runs WHERE id = '${runId}'`),
      (s) => s === 'completed' || s === 'failed',
      600_000,
      500,
    );
    console.log(`run after restart: ${recovered} → ${final}`);
    expect(final).toBe('completed');
    expect(num(`SELECT count(*) FROM audit_log WHERE target_id = '${runId}' AND action = 'run.completed'`)).toBe(1);
  });

  it('a score comparison: after SIGKILL during its bootstrap and restart its job is retried once and it completes', async () => {
    expect(cohortVersionId).toMatch(/^[0-9a-f-]{36}$/);
    const stat = await token('statistician@demo.test');
    const created = await server.fetchJson('/api/comparisons', {
      method: 'POST',
      headers: { ...stat, 'Content-Type': 'application/json' },
      body: JSON.stringify({
        firstScoreVersionId: scoreVersionId,
        secondScoreVersionId: otherScoreVersionId,
        cohortVersionId,
        // About 40 replicates at a million rows: a bootstrap of some seconds to kill in, at any row count.
        settings: { bootstrapReplicates: Math.min(2000, Math.ceil(40_000_000 / ROWS)) },
      }),
    });
    expect(created.status, JSON.stringify(created.body)).toBe(202);
    const id = String((created.body.comparison as { id: string }).id);
    const at = () =>
      sql(`SELECT status || ' ' || round(progress::numeric, 2) FROM score_comparisons WHERE id = '${id}'`);
    // Kill once its bootstrap is under way (progress past the scores' own figures), not before and not after.
    await until(
      'the bootstrap to be under way',
      () =>
        num(
          `SELECT CASE status WHEN 'queued' THEN 0 WHEN 'running' THEN progress ELSE 1 END FROM score_comparisons WHERE id = '${id}'`,
        ),
      (p) => p > 0.3,
      300_000,
      20,
    );
    const statusAtKill = at();
    await server.kill('SIGKILL');
    console.log(`comparison at kill: ${statusAtKill}`);
    const [statusThen, progressThen] = statusAtKill.split(' ');
    expect(statusThen, `it finished before the kill (${statusAtKill})`).toBe('running');
    expect(Number(progressThen), 'killed during the bootstrap').toBeGreaterThanOrEqual(0.3);
    expect(sql(`SELECT status FROM score_comparisons WHERE id = '${id}'`)).toBe('running');

    await server.start();
    const again = await token('statistician@demo.test');
    const final = await until(
      'the retried comparison to finish',
      async () =>
        (await server.fetchJson(`/api/comparisons/${id}?waitSeconds=20`, { headers: again })).body.comparison as {
          status: string;
          resultsSha256: string | null;
        },
      (c) => c?.status === 'completed' || c?.status === 'failed',
      900_000,
      500,
    );
    expect(final.status).toBe('completed');
    expect(final.resultsSha256).toMatch(/^[0-9a-f]{64}$/);
    const count = (action: string) =>
      num(`SELECT count(*) FROM audit_log WHERE target_id = '${id}' AND action = '${action}'`);
    expect([count('comparison.requeued'), count('comparison.completed')]).toEqual([1, 1]);
  });

  it('the database passes its integrity checks afterwards', async () => {
    expect(integrity()).toEqual(CLEAN);
    expect(num(`SELECT count(*) FROM validation_runs WHERE status = 'running'`)).toBe(0);
    expect(num(`SELECT count(*) FROM score_comparisons WHERE status IN ('queued', 'running')`)).toBe(0);
    const chain = await server.fetchJson('/api/audit/verify', { headers: await token('admin@demo.test') });
    expect(chain.status).toBe(200);
    expect(chain.body.ok).toBe(true);
    // PostgreSQL's own check of the b-tree indexes of the cohort tables (amcheck, shipped with Debian's server package).
    sql('CREATE EXTENSION IF NOT EXISTS amcheck');
    const indexes =
      sql(`SELECT string_agg(bt_index_check(c.oid)::text, ',') FROM pg_index i JOIN pg_class c ON c.oid = i.indexrelid JOIN pg_am a ON a.oid = c.relam
      WHERE a.amname = 'btree' AND i.indrelid IN ('cohort_row_blocks'::regclass, 'cohort_versions'::regclass, 'validation_runs'::regclass, 'audit_log'::regclass)`);
    expect(indexes).toBeDefined();
  });
});
