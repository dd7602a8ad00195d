// Validation runs: the queue, the stored record, reproduce, compare, the database's refusal to edit a completed run,
// retries after a crash, role rules and settings validation. Fixture data is invented (tests/helpers/fixtures.ts).
import request from 'supertest';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { config } from '../../server/src/platform/config';
import type { RunDetail, RunResults } from '@shared/runs';
import { startBackgroundServices, stopBackgroundServices } from '../../server/src/jobs/background';
import { asStored, engineSettings, ENGINE_VERSION } from '../../server/src/domain/runs/runCompute';
import type { JobHandler } from '../../server/src/jobs/queue';
import { processNextRun, runAbandonedJob, runJob } from '../../server/src/domain/runs/runQueue';
import { applyModel, validate } from '../../server/src/stats/index';
import { app, bearer, dataSource, refusedTwice, tokenFor, useDatabase } from '../helpers/api';
import {
  createCohortFixture,
  createScoreFixture,
  FIXTURE_MODEL,
  kestrelRows,
  type CohortFixture,
  type ScoreFixture,
} from '../helpers/fixtures';

useDatabase();

let score: ScoreFixture;
let cohort: CohortFixture;
let undated: CohortFixture;
let lacking: CohortFixture;

const SETTINGS = { subgroupColumns: ['sex', 'unit'], timeGrouping: 'month' as const };

async function createRun(role: 'statistician' | 'steward', body: Record<string, unknown>) {
  return request(app)
    .post('/api/runs')
    .set(bearer(await tokenFor(role)))
    .send(body);
}

async function getRun(id: string): Promise<RunDetail> {
  const res = await request(app)
    .get(`/api/runs/${id}`)
    .set(bearer(await tokenFor('statistician')));
  expect(res.status).toBe(200);
  return res.body.run as RunDetail;
}

/** Drains the queue in this process (the worker thread still does the computing). */
async function drainQueue(): Promise<void> {
  while (await processNextRun());
}

beforeAll(async () => {
  await drainQueue(); // nothing from an earlier file may be left waiting
  score = await createScoreFixture();
  cohort = await createCohortFixture(kestrelRows(1500, 7, { logitShift: 0.2, months: 6 }));
  undated = await createCohortFixture(kestrelRows(300, 8).map((r) => ({ ...r, eventDate: null })));
  // The same patients without the charlson_index column: the formula cannot be applied.
  lacking = await createCohortFixture(
    kestrelRows(300, 9).map((r) => {
      const { charlson_index: _drop, ...rest } = r.predictors;
      return { ...r, predictors: rest };
    }),
  );
});

afterAll(async () => {
  await stopBackgroundServices();
});

describe('a validation run through the background queue', () => {
  let run: RunDetail;

  it('is queued with the default settings filled in and locks the score version', async () => {
    const res = await createRun('statistician', {
      scoreVersionId: score.scoreVersionId,
      cohortVersionId: cohort.cohortVersionId,
      settings: SETTINGS,
    });
    expect(res.status).toBe(201);
    run = res.body.run;
    expect(run.status).toBe('queued');
    expect(run.attempt).toBe(1);
    expect(run.settings.thresholds).toEqual([0.05, 0.1, 0.2, 0.3, 0.5]);
    expect(run.settings.netBenefitThresholds).toHaveLength(50);
    expect(run.settings.netBenefitThresholds[0]).toBe(0.01);
    expect(run.settings.netBenefitThresholds[49]).toBe(0.5);
    expect(run.settings.loessSpan).toBe(0.75);
    expect(run.settings.bootstrapReplicates).toBe(0);
    const sv: { locked: boolean }[] = await dataSource.query('SELECT locked FROM score_versions WHERE id = $1', [
      score.scoreVersionId,
    ]);
    expect(sv[0].locked).toBe(true);
  });

  it('is computed by the real background worker and stored whole with hashes', async () => {
    await startBackgroundServices();
    const seen = new Set<string>();
    const deadline = Date.now() + 60_000;
    let current = await getRun(run.id);
    while (!['completed', 'failed'].includes(current.status) && Date.now() < deadline) {
      seen.add(current.status);
      await new Promise((r) => setTimeout(r, 100));
      current = await getRun(run.id);
    }
    await stopBackgroundServices();
    expect(current.error).toBeNull();
    expect(current.status).toBe('completed');
    run = current;
    expect(run.progress).toBe(1);
    expect(run.engineVersion).toBe(ENGINE_VERSION);
    expect(run.inputsSha256).toMatch(/^[0-9a-f]{64}$/);
    expect(run.resultsSha256).toMatch(/^[0-9a-f]{64}$/);
    expect(run.startedAt && run.finishedAt && run.startedAt <= run.finishedAt).toBe(true);
    const r = run.results as RunResults;
    expect(r.overall.n).toBe(1500);
    expect(r.overall.auc.lower).toBeLessThan(r.overall.auc.estimate);
    expect(r.overall.auc.upper).toBeGreaterThan(r.overall.auc.estimate);
    expect(run.headline).toEqual({
      n: 1500,
      events: r.overall.events,
      auc: r.overall.auc.estimate,
      oe: r.overall.oe.estimate,
    });
  });

  it('stores exactly what the engine computes directly on the same rows', async () => {
    const r = run.results as RunResults;
    const rows = cohort.rows;
    const columns: Record<string, string[]> = {};
    for (const pred of FIXTURE_MODEL.predictors)
      columns[pred.column] = rows.map((x) => String(x.predictors[pred.column]));
    const applied = applyModel(FIXTURE_MODEL, columns, rows.length);
    if (!applied.ok) throw new Error(applied.message);
    const y = Uint8Array.from(rows.map((x) => x.outcome));
    const direct = validate(applied.p, y, engineSettings(run.settings));
    expect(r.overall).toEqual(asStored(direct));

    // Subgroups: every level of each asked-for column, counts from the rows themselves.
    const small = r.subgroups.find((g) => g.column === 'unit' && g.level === 'Small')!;
    const smallRows = rows.filter((x) => x.subgroups!.unit === 'Small');
    expect(small.n).toBe(smallRows.length);
    expect(small.events).toBe(smallRows.filter((x) => x.outcome === 1).length);
    // Rule: fewer than 10 events or non-events → too small (common practice, no source). ~9 patients here.
    expect(small.n).toBeGreaterThan(0);
    expect(small.n).toBeLessThan(20);
    expect(small.tooSmall).toBe(true);
    for (const g of r.subgroups) expect(g.tooSmall).toBe(g.events < 10 || g.n - g.events < 10);
    expect(small.result).toBeUndefined();
    const female = r.subgroups.find((g) => g.column === 'sex' && g.level === 'female')!;
    const femaleIdx = rows.map((x, i) => (x.subgroups!.sex === 'female' ? i : -1)).filter((i) => i >= 0);
    const femaleDirect = validate(
      Float64Array.from(femaleIdx.map((i) => applied.p[i])),
      Uint8Array.from(femaleIdx.map((i) => y[i])),
      engineSettings(run.settings, false),
    );
    expect(female.tooSmall).toBe(false);
    expect(female.n).toBe(femaleIdx.length);
    expect(female.result!.auc!.estimate).toBe(femaleDirect.auc.estimate);
    expect(r.subgroups.filter((g) => g.column === 'unit').map((g) => g.level)).toEqual([
      'Alder',
      'Birch',
      'Cedar',
      'Rowan',
      'Small',
    ]);

    // Periods by month of the event date: observed rate and mean predicted risk recomputed here by hand.
    expect(r.periods.map((p) => p.period)).toEqual(['2024-01', '2024-02', '2024-03', '2024-04', '2024-05', '2024-06']);
    for (const period of r.periods) {
      const idx = rows.map((x, i) => (x.eventDate!.startsWith(period.period) ? i : -1)).filter((i) => i >= 0);
      expect(period.n).toBe(idx.length);
      expect(period.events).toBe(idx.filter((i) => y[i] === 1).length);
      expect(period.observed).toBeCloseTo(period.events / period.n, 12);
      expect(period.expected).toBeCloseTo(idx.reduce((s, i) => s + applied.p[i], 0) / idx.length, 12);
    }
  });

  it('audits creation and completion and queues an e-mail for the statistician', async () => {
    const audit: { action: string }[] = await dataSource.query(
      `SELECT action FROM audit_log WHERE target_id = $1 ORDER BY seq`,
      [run.id],
    );
    expect(audit.map((a) => a.action)).toEqual(['run.created', 'run.completed']);
    const mail: { recipients: string[]; kind: string }[] = await dataSource.query(
      `SELECT recipients, kind FROM email_outbox WHERE text LIKE $1`,
      [`%/runs/${run.id}%`],
    );
    expect(mail).toHaveLength(1);
    expect(mail[0].kind).toBe('run.completed');
    expect(mail[0].recipients).toContain('statistician@demo.test');
  });

  it('reproduces bit for bit', async () => {
    const res = await request(app)
      .post(`/api/runs/${run.id}/reproduce`)
      .set(bearer(await tokenFor('statistician')));
    expect(res.status).toBe(200);
    expect(res.body.match).toBe(true);
    expect(res.body.storedSha256).toBe(run.resultsSha256);
    expect(res.body.recomputedSha256).toBe(run.resultsSha256);
    expect(res.body.differences).toBeUndefined();
    const audit: { n: string }[] = await dataSource.query(
      `SELECT count(*)::text AS n FROM audit_log WHERE target_id = $1 AND action = 'run.reproduced'`,
      [run.id],
    );
    expect(Number(audit[0].n)).toBe(1);
  });

  it('the database refuses an UPDATE or DELETE of the completed run, even by direct SQL', async () => {
    await expect(
      dataSource.query(`UPDATE validation_runs SET results = '{}'::jsonb WHERE id = $1`, [run.id]),
    ).rejects.toThrow(/immutable/);
    await expect(
      dataSource.query(`UPDATE validation_runs SET progress_message = 'x' WHERE id = $1`, [run.id]),
    ).rejects.toThrow(/immutable/);
    await refusedTwice(`DELETE FROM validation_runs WHERE id = $1`, [run.id], /cannot be deleted/);
    const after = await getRun(run.id);
    expect(after.resultsSha256).toBe(run.resultsSha256);
  });

  it('lists runs with filters and paging', async () => {
    const token = await tokenFor('chair');
    const res = await request(app).get(`/api/runs?score=${score.scoreId}&status=completed&limit=1`).set(bearer(token));
    expect(res.status).toBe(200);
    expect(res.body.total).toBeGreaterThanOrEqual(1);
    expect(res.body.runs).toHaveLength(1);
    expect(res.body.runs[0].scoreId).toBe(score.scoreId);
    expect(res.body.runs[0].results).toBeUndefined();
    const none = await request(app).get(`/api/runs?score=${score.scoreId}&status=failed`).set(bearer(token));
    expect(none.body.total).toBe(0);
  });

  it('compares two runs of the same score: deltas are b − a', async () => {
    const other = await createCohortFixture(kestrelRows(1200, 11, { logitShift: 0.6 }));
    const res = await createRun('steward', {
      scoreVersionId: score.scoreVersionId,
      cohortVersionId: other.cohortVersionId,
      settings: {},
    });
    expect(res.status).toBe(201);
    await drainQueue();
    const b = await getRun(res.body.run.id);
    expect(b.status).toBe('completed');
    const cmp = await request(app)
      .get(`/api/runs/compare?a=${run.id}&b=${b.id}`)
      .set(bearer(await tokenFor('chair')));
    expect(cmp.status).toBe(200);
    expect(cmp.body.sameScore).toBe(true);
    expect(cmp.body.settingsDiffer).toEqual(expect.arrayContaining(['subgroupColumns', 'timeGrouping']));
    const auc = cmp.body.metrics.find((m: { key: string }) => m.key === 'auc');
    expect(auc.a).toBe(run.results!.overall.auc.estimate);
    expect(auc.b).toBe(b.results!.overall.auc.estimate);
    expect(auc.delta).toBeCloseTo(auc.b - auc.a, 15);
    const oe = cmp.body.metrics.find((m: { key: string }) => m.key === 'oe');
    // The second cohort was drawn with a larger logit shift: more events than predicted, O/E rises.
    expect(oe.delta).toBeGreaterThan(0);
  });
});

describe('the queue keeps the API responsive', () => {
  it('computes in a worker thread: the event loop is never blocked for long', async () => {
    const big = await createCohortFixture(kestrelRows(4000, 21));
    const res = await createRun('statistician', {
      scoreVersionId: score.scoreVersionId,
      cohortVersionId: big.cohortVersionId,
      settings: { bootstrapReplicates: 200 },
    });
    expect(res.status).toBe(201);
    let maxGap = 0;
    let last = Date.now();
    const timer = setInterval(() => {
      const now = Date.now();
      maxGap = Math.max(maxGap, now - last);
      last = now;
    }, 10);
    const started = Date.now();
    await drainQueue();
    const elapsed = Date.now() - started;
    clearInterval(timer);
    const done = await getRun(res.body.run.id);
    expect(done.status).toBe('completed');
    expect(done.results!.overall.bootstrap?.replicates).toBe(200);
    // The computation itself takes far longer than any pause of this thread.
    expect(maxGap).toBeLessThan(Math.max(250, elapsed / 4));
  });
});

describe('a run that cannot be computed', () => {
  it('fails with the reason when the cohort lacks a predictor', async () => {
    const res = await createRun('steward', {
      scoreVersionId: score.scoreVersionId,
      cohortVersionId: lacking.cohortVersionId,
      settings: {},
    });
    expect(res.status).toBe(201);
    await drainQueue();
    const run = await getRun(res.body.run.id);
    expect(run.status).toBe('failed');
    expect(run.error).toMatch(/charlson_index/);
    expect(run.results).toBeNull();
    const audit: { action: string; details: { reason: string } }[] = await dataSource.query(
      `SELECT action, details FROM audit_log WHERE target_id = $1 ORDER BY seq`,
      [run.id],
    );
    expect(audit.map((a) => a.action)).toEqual(['run.created', 'run.failed']);
    const mail: { kind: string }[] = await dataSource.query(`SELECT kind FROM email_outbox WHERE text LIKE $1`, [
      `%/runs/${run.id}%`,
    ]);
    expect(mail.map((m) => m.kind)).toEqual(['run.failed']);
    // A failed run is a final record too; reproduce is refused.
    await expect(
      dataSource.query(`UPDATE validation_runs SET status = 'queued' WHERE id = $1`, [run.id]),
    ).rejects.toThrow(/immutable/);
    const rep = await request(app)
      .post(`/api/runs/${run.id}/reproduce`)
      .set(bearer(await tokenFor('statistician')));
    expect(rep.status).toBe(409);
  });
});

describe('crash recovery', () => {
  async function insertRunning(attempt: number): Promise<string> {
    const rows: { id: string }[] = await dataSource.query(
      `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, started_at, attempt)
       VALUES ($1, $2, '{}'::jsonb, 'running', 0.4, now(), $3) RETURNING id`,
      [score.scoreVersionId, cohort.cohortVersionId, attempt],
    );
    return rows[0].id;
  }

  /** The job pg-boss hands a worker for a run; retryCount 1 is the retry after a process died. */
  const jobOf = (runId: string, retryCount: number) =>
    ({ id: `test-${runId}`, name: 'run', data: { runId }, retryCount, retryLimit: 1 }) as unknown as Parameters<
      JobHandler<{ runId: string }>
    >[0];
  const auditCount = async (id: string, action: string) =>
    (
      (await dataSource.query(`SELECT count(*)::int AS n FROM audit_log WHERE target_id = $1 AND action = $2`, [
        id,
        action,
      ])) as { n: number }[]
    )[0].n;

  it('the retry of a run whose process died computes it again, once; a later attempt stores nothing more', async () => {
    const interrupted = await insertRunning(1);
    await runJob(jobOf(interrupted, 1));
    const done = await getRun(interrupted);
    expect(done.status).toBe('completed');
    expect(done.attempt).toBe(2);
    expect(await auditCount(interrupted, 'run.requeued')).toBe(1);
    // A duplicate delivery finds the result stored and does nothing: one result, one completion entry.
    await runJob(jobOf(interrupted, 1));
    const again = await getRun(interrupted);
    expect(again.resultsSha256).toBe(done.resultsSha256);
    expect(again.finishedAt).toBe(done.finishedAt);
    expect(await auditCount(interrupted, 'run.completed')).toBe(1);
  });

  it('a run cut off on both attempts is marked failed by its dead-letter job', async () => {
    const exhausted = await insertRunning(2);
    await runAbandonedJob(jobOf(exhausted, 0));
    const b = await getRun(exhausted);
    expect(b.status).toBe('failed');
    expect(b.error).toMatch(/2 times/);
  });

  it('a retry waits while another live process holds the run, and finds it finished there', async () => {
    const id = await insertRunning(1);
    // Another process's lease: a session-level advisory lock on its own connection (as runJob takes it).
    const other = new pg.Client({ ...config.db, application_name: 'plumbline test: another process' });
    await other.connect();
    let retried: Promise<void> | undefined;
    try {
      await other.query(`SELECT pg_advisory_lock(hashtextextended('plumbline run ' || $1::text, 0))`, [id]);
      retried = runJob(jobOf(id, 1));
      // The retry is blocked on the lease (a waiting advisory lock request), and the run is untouched.
      const waiting = async () =>
        (
          (await dataSource.query(
            `SELECT count(*)::int AS n FROM pg_locks WHERE locktype = 'advisory' AND NOT granted AND ((classid::bigint << 32) | objid::bigint) = hashtextextended('plumbline run ' || $1::text, 0)`,
            [id],
          )) as { n: number }[]
        )[0].n;
      const deadline = Date.now() + 60_000;
      while ((await waiting()) === 0 && Date.now() < deadline) await new Promise((r) => setTimeout(r, 50));
      expect(await waiting()).toBe(1);
      expect((await getRun(id)).attempt).toBe(1);
      // The "other process" finishes the run itself before it lets go.
      await other.query(
        `UPDATE validation_runs SET status = 'failed', error = 'finished by the other process', finished_at = now() WHERE id = $1`,
        [id],
      );
    } finally {
      await other.end(); // PostgreSQL drops its lock with its session
    }
    await retried;
    const after = await getRun(id);
    expect(after.status).toBe('failed');
    expect(after.error).toBe('finished by the other process');
    expect(after.attempt).toBe(1);
  });

  it('holds the lease while it computes, and drops it when the run ends', async () => {
    const res = await createRun('statistician', {
      scoreVersionId: score.scoreVersionId,
      cohortVersionId: cohort.cohortVersionId,
    });
    expect(res.status).toBe(201);
    const id = res.body.run.id as string;
    const leaseHeld = async () =>
      (
        (await dataSource.query(
          `SELECT count(*)::int AS n FROM pg_locks WHERE locktype = 'advisory' AND granted
           AND objsubid = 1 AND ((classid::bigint << 32) | objid::bigint) = hashtextextended('plumbline run ' || $1::text, 0)`,
          [id],
        )) as { n: number }[]
      )[0].n > 0;
    const processing = processNextRun();
    let sawLease = false;
    while (!sawLease) {
      const status = (await getRun(id)).status;
      if (status === 'running') sawLease = await leaseHeld();
      if (status === 'completed' || status === 'failed') break;
      await new Promise((r) => setTimeout(r, 20));
    }
    expect(await processing).toBe(id);
    expect(sawLease).toBe(true);
    expect(await leaseHeld()).toBe(false);
    expect((await getRun(id)).status).toBe('completed');
  });

  it('an UPDATE of a queued or running run is allowed (progress)', async () => {
    const id = await insertRunning(1);
    await dataSource.query(`UPDATE validation_runs SET progress = 0.5, progress_message = 'half way' WHERE id = $1`, [
      id,
    ]);
    expect((await getRun(id)).progress).toBe(0.5);
    await runJob(jobOf(id, 1));
    expect((await getRun(id)).status).toBe('completed');
  });
});

describe('who may do what', () => {
  let completedId: string;
  beforeAll(async () => {
    const rows: { id: string }[] = await dataSource.query(
      `SELECT id FROM validation_runs WHERE status = 'completed' LIMIT 1`,
    );
    completedId = rows[0].id;
  });

  it('a clinician is refused everywhere', async () => {
    const t = bearer(await tokenFor('clinician'));
    const body = { scoreVersionId: score.scoreVersionId, cohortVersionId: cohort.cohortVersionId };
    expect((await request(app).post('/api/runs').set(t).send(body)).status).toBe(403);
    expect((await request(app).get('/api/runs').set(t)).status).toBe(403);
    expect((await request(app).get(`/api/runs/${completedId}`).set(t)).status).toBe(403);
    expect((await request(app).post(`/api/runs/${completedId}/reproduce`).set(t)).status).toBe(403);
    expect((await request(app).get(`/api/runs/compare?a=${completedId}&b=${completedId}`).set(t)).status).toBe(403);
  });

  it('a chair reads and compares but cannot start or reproduce a run; a steward cannot reproduce or compare', async () => {
    const chair = bearer(await tokenFor('chair'));
    const body = { scoreVersionId: score.scoreVersionId, cohortVersionId: cohort.cohortVersionId };
    expect((await request(app).post('/api/runs').set(chair).send(body)).status).toBe(403);
    expect((await request(app).post(`/api/runs/${completedId}/reproduce`).set(chair)).status).toBe(403);
    expect((await request(app).get(`/api/runs/${completedId}`).set(chair)).status).toBe(200);
    const steward = bearer(await tokenFor('steward'));
    expect((await request(app).post(`/api/runs/${completedId}/reproduce`).set(steward)).status).toBe(403);
    expect((await request(app).get(`/api/runs/compare?a=${completedId}&b=${completedId}`).set(steward)).status).toBe(
      403,
    );
    expect((await request(app).get('/api/runs').set(steward)).status).toBe(200);
    const admin = bearer(await tokenFor('admin'));
    expect((await request(app).post('/api/runs').set(admin).send(body)).status).toBe(403);
  });

  it('without a token: 401', async () => {
    expect((await request(app).get('/api/runs')).status).toBe(401);
  });
});

describe('settings validation', () => {
  const base = () => ({ scoreVersionId: score.scoreVersionId, cohortVersionId: cohort.cohortVersionId });
  it.each([
    [{ thresholds: [1.5] }, /thresholds/],
    [{ thresholds: [0.3, 0.1] }, /ascend/],
    [{ loessSpan: 0 }, /loessSpan/],
    [{ hosmerLemeshowGroups: 2 }, /hosmerLemeshowGroups/],
    [{ bootstrapReplicates: 5000 }, /bootstrapReplicates/],
    [{ bootstrapReplicates: 2.5 }, /bootstrapReplicates/],
    [{ timeGrouping: 'week' }, /timeGrouping/],
    [{ subgroupColumns: ['sex', 'sex'] }, /twice/],
    [{ colour: 'blue' }, /colour|unrecognized/i],
  ])('refuses %j', async (settings, message) => {
    const res = await createRun('statistician', { ...base(), settings });
    expect(res.status).toBe(400);
    expect(res.body.error).toMatch(message);
  });

  it('refuses a subgroup column the cohort does not have, and time grouping without dates', async () => {
    const a = await createRun('statistician', { ...base(), settings: { subgroupColumns: ['ward'] } });
    expect(a.status).toBe(400);
    expect(a.body.error).toMatch(/ward/);
    const b = await createRun('statistician', {
      scoreVersionId: score.scoreVersionId,
      cohortVersionId: undated.cohortVersionId,
      settings: { timeGrouping: 'quarter' },
    });
    expect(b.status).toBe(400);
    expect(b.body.error).toMatch(/event dates/);
  });

  it('404 for an unknown score or cohort version; 400 for a malformed id', async () => {
    const missing = '00000000-0000-4000-8000-000000000000';
    expect(
      (await createRun('statistician', { scoreVersionId: missing, cohortVersionId: cohort.cohortVersionId })).status,
    ).toBe(404);
    expect(
      (await createRun('statistician', { scoreVersionId: score.scoreVersionId, cohortVersionId: missing })).status,
    ).toBe(404);
    expect(
      (await createRun('statistician', { scoreVersionId: 'nope', cohortVersionId: cohort.cohortVersionId })).status,
    ).toBe(400);
    expect(
      (
        await request(app)
          .get(`/api/runs/${missing}`)
          .set(bearer(await tokenFor('chair')))
      ).status,
    ).toBe(404);
  });
});

describe('the worker thread under plain tsx (as the server runs)', () => {
  it('starts, loads the cohort itself, computes, and gives the same hashes as an inline computation', async () => {
    const { execFile } = await import('node:child_process');
    const { promisify } = await import('node:util');
    const { stdout } = await promisify(execFile)('node_modules/.bin/tsx', ['tests/helpers/runPoolProbe.ts'], {
      cwd: process.cwd(),
      timeout: 60_000,
    });
    const out = JSON.parse(stdout.trim().split('\n').pop()!);
    expect(out.threaded).toMatch(/^[0-9a-f]{64}$/);
    expect(out.threaded).toBe(out.inline);
    expect(out.threadedInputs).toMatch(/^[0-9a-f]{64}$/);
    expect(out.threadedInputs).toBe(out.inlineInputs);
    expect(out.driftPatients).toBe(600);
  });
});
