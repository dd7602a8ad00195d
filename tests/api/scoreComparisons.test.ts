// Two score versions head to head on the same patients: a request queues the comparison (202) and its job computes
// it (run here by processNextComparison: API tests start no job workers); the stored comparison equals the engine's
// compareScores on the same rows computed here independently (exact), who may create and read it, the refusals for
// bad input, a row that moves only forward and never changes once ended, a failed job, the retry after a crashed
// process, and a review naming it (shown in the run's report). Fixture data and the second score are invented.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { ScoreModel } from '@shared/model';
import type { Role } from '@shared/roles';
import type { CompletedScoreComparison, ScoreComparisonDetail } from '@shared/scoreComparison';
import { stopBackgroundServices } from '../../server/src/jobs/background';
import type { JobHandler } from '../../server/src/jobs/queue';
import { dataSource } from '../../server/src/platform/database/dataSource';
import {
  comparisonJobWith,
  processNextComparison,
  type ComputeComparison,
} from '../../server/src/domain/comparisons/comparisonQueue';
import { asStored } from '../../server/src/domain/runs/runCompute';
import { processNextRun } from '../../server/src/domain/runs/runQueue';
import { WREN_V1_MODEL } from '../../server/src/demo/seeds/competingScore';
import { compareScores } from '../../server/src/stats/compareScores';
import { applyModel, validate } from '../../server/src/stats/index';
import { app, bearer, ownerQuery, refusedTwice, tokenFor, useDatabase } from '../helpers/api';
import {
  createCohortFixture,
  createScoreFixture,
  FIXTURE_MODEL,
  kestrelRows,
  type CohortFixture,
  type FixtureRow,
  type ScoreFixture,
} from '../helpers/fixtures';

useDatabase();

let first: ScoreFixture;
let second: ScoreFixture;
let needsAlbumin: ScoreFixture;
let cohort: CohortFixture;
let otherCohort: CohortFixture;
const THRESHOLDS = [0.05, 0.1, 0.15, 0.2, 0.3];
const SETTINGS = { netBenefitThresholds: THRESHOLDS, bootstrapReplicates: 60, bootstrapSeed: 4242 };

const as = async (role: Role) => bearer(await tokenFor(role));
const create = async (role: Role, body: Record<string, unknown>) =>
  request(app)
    .post('/api/comparisons')
    .set(await as(role))
    .send(body);

const read = async (id: string, waitSeconds = 0): Promise<ScoreComparisonDetail> => {
  const res = await request(app)
    .get(`/api/comparisons/${id}`)
    .query({ waitSeconds })
    .set(await as('statistician'));
  expect(res.status, JSON.stringify(res.body)).toBe(200);
  return res.body.comparison;
};
/** Runs the waiting comparison jobs here (API tests start no job workers); the ids it computed. */
async function runComparisonJobs(compute?: ComputeComparison): Promise<string[]> {
  const ran: string[] = [];
  for (let id = await processNextComparison(compute); id; id = await processNextComparison(compute)) ran.push(id);
  return ran;
}
const auditActions = async (id: string) =>
  (
    (await dataSource.query(`SELECT action FROM audit_log WHERE target_id = $1 ORDER BY seq`, [id])) as {
      action: string;
    }[]
  ).map((a) => a.action);

function risks(model: ScoreModel, rows: FixtureRow[]): Float64Array {
  const columns: Record<string, string[]> = {};
  for (const pred of model.predictors) columns[pred.column] = rows.map((x) => String(x.predictors[pred.column]));
  const applied = applyModel(model, columns, rows.length);
  if (!applied.ok) throw new Error(applied.message);
  return applied.p;
}

beforeAll(async () => {
  while (await processNextRun());
  await runComparisonJobs();
  first = await createScoreFixture();
  second = await createScoreFixture({ model: WREN_V1_MODEL });
  needsAlbumin = await createScoreFixture({
    model: { intercept: -2, predictors: [{ column: 'albumin', coefficient: -0.05, transform: 'linear' }] },
  });
  cohort = await createCohortFixture(kestrelRows(1200, 77));
  otherCohort = await createCohortFixture(kestrelRows(300, 78));
});

afterAll(async () => {
  await stopBackgroundServices();
});

describe('a comparison of two score versions on one cohort version', () => {
  let made: CompletedScoreComparison;
  let queued: ScoreComparisonDetail;
  let p1: Float64Array;
  let p2: Float64Array;
  let y: Uint8Array;

  beforeAll(async () => {
    const res = await create('statistician', {
      firstScoreVersionId: first.scoreVersionId,
      secondScoreVersionId: second.scoreVersionId,
      cohortVersionId: cohort.cohortVersionId,
      settings: SETTINGS,
    });
    // Accepted, not computed: the request answers with the queued row at once.
    expect(res.status, JSON.stringify(res.body)).toBe(202);
    queued = res.body.comparison;
    expect(queued).toMatchObject({ status: 'queued', progress: 0, results: null, headline: null, error: null });
    expect(queued.resultsSha256).toBeNull();
    // Nothing computes it until its job runs; a read waiting for the end answers after its time, still queued.
    expect((await read(queued.id, 1)).status).toBe('queued');
    expect(await runComparisonJobs()).toEqual([queued.id]);
    const done = await read(queued.id, 5);
    expect(done.status).toBe('completed');
    made = done as CompletedScoreComparison;
    p1 = risks(FIXTURE_MODEL, cohort.rows);
    p2 = risks(WREN_V1_MODEL, cohort.rows);
    y = Uint8Array.from(cohort.rows.map((r) => r.outcome));
  });

  it("stores the engine's paired DeLong test and bootstrap net-benefit differences on the same rows, exactly", () => {
    const expected = asStored(compareScores(p1, p2, y, { thresholds: THRESHOLDS, replicates: 60, seed: 4242 }));
    expect(made.results.n).toBe(cohort.rows.length);
    expect(made.results.events).toBe(expected.events);
    expect(made.results.auc).toEqual(expected.auc);
    expect(made.results.netBenefit).toEqual(expected.netBenefit);
    expect(made.results.bootstrap).toEqual(expected.bootstrap);
    // The bootstrap made real intervals around each difference.
    for (const d of made.results.netBenefit) {
      expect(d.difference.lower!).toBeLessThanOrEqual(d.difference.upper!);
      expect(d.difference.upper! - d.difference.lower!).toBeGreaterThan(0);
    }
  });

  it("keeps each score's own figures and calibration curve as the engine gives them", () => {
    const own = validate(p2, y, { netBenefitThresholds: THRESHOLDS, bootstrapReplicates: 0 });
    expect(made.results.second.auc.estimate).toBe(own.auc.estimate);
    expect(made.results.second.calibrationCurve).toEqual(asStored(own.calibrationCurve));
    expect(made.results.treatAll).toEqual(own.netBenefit.map((r) => r.treatAll));
    // Two AUC routines of the engine (single and paired DeLong) agree to rounding.
    expect(made.results.first.auc.estimate).toBeCloseTo(made.results.auc.first, 12);
  });

  it('went queued → completed with one audit entry each, and ended with progress 1', async () => {
    expect(made.progress).toBe(1);
    expect(made.error).toBeNull();
    expect(Date.parse(made.completedAt!)).toBeGreaterThanOrEqual(Date.parse(made.createdAt));
    expect(await auditActions(made.id)).toEqual(['comparison.created', 'comparison.completed']);
    expect({ ...queued, status: made.status }).toMatchObject({
      id: made.id,
      first: made.first,
      cohortId: made.cohortId,
    });
  });

  it('reads back the same record with its hashes, names and headline, and lists it', async () => {
    const got = await request(app)
      .get(`/api/comparisons/${made.id}`)
      .set(await as('chair'));
    expect(got.status).toBe(200);
    expect(got.body.comparison).toEqual(made);
    expect(made.inputsSha256).toMatch(/^[0-9a-f]{64}$/);
    expect(made.resultsSha256).toMatch(/^[0-9a-f]{64}$/);
    expect(made.first.scoreVersionId).toBe(first.scoreVersionId);
    expect(made.headline.aucDifference).toBe(made.results.auc.difference.estimate);
    const list = await request(app)
      .get('/api/comparisons')
      .query({ cohortVersion: cohort.cohortVersionId })
      .set(await as('admin'));
    expect(list.status).toBe(200);
    expect(list.body.comparisons.map((c: { id: string; status: string }) => [c.id, c.status])).toEqual([
      [made.id, 'completed'],
    ]);
  });

  it('is computed again from its inputs to the same results hash', async () => {
    const res = await request(app)
      .post(`/api/comparisons/${made.id}/reproduce`)
      .set(await as('admin'));
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ match: true, storedSha256: made.resultsSha256 });
    expect(res.body.recomputedSha256).toBe(made.resultsSha256);
    expect(res.body.differences).toBeUndefined();
    const chair = await request(app)
      .post(`/api/comparisons/${made.id}/reproduce`)
      .set(await as('chair'));
    expect(chair.status).toBe(403);
  });

  it('is never changed or deleted (no grant; the owner meets the trigger)', async () => {
    await refusedTwice(`UPDATE score_comparisons SET settings = '{}' WHERE id = $1`, [made.id], /append-only/);
    await refusedTwice('DELETE FROM score_comparisons WHERE id = $1', [made.id], /append-only/);
    // The job's own columns are granted, and the trigger keeps a completed row as it is.
    await expect(
      dataSource.query(`UPDATE score_comparisons SET status = 'failed', error = 'x' WHERE id = $1`, [made.id]),
    ).rejects.toThrow(/completed and its record is append-only/);
    await expect(
      dataSource.query(`UPDATE score_comparisons SET results_sha256 = repeat('0', 64) WHERE id = $1`, [made.id]),
    ).rejects.toThrow(/append-only/);
  });

  it('can be named by the review of a run of one of its score versions on the same cohort version, and the report carries it', async () => {
    const run = await request(app)
      .post('/api/runs')
      .set(await as('statistician'))
      .send({ scoreVersionId: first.scoreVersionId, cohortVersionId: cohort.cohortVersionId });
    expect(run.status).toBe(201);
    while (await processNextRun());

    // A comparison still waiting for its job has no results to rely on.
    const waiting = await create('statistician', {
      firstScoreVersionId: first.scoreVersionId,
      secondScoreVersionId: second.scoreVersionId,
      cohortVersionId: cohort.cohortVersionId,
      settings: { ...SETTINGS, bootstrapReplicates: 0 },
    });
    expect(waiting.status).toBe(202);
    const early = await request(app)
      .post(`/api/runs/${run.body.run.id}/review`)
      .set(await as('statistician'))
      .send({
        verdict: 'fit for use',
        reasoning: 'Better than the alternative.',
        comparisonId: waiting.body.comparison.id,
      });
    expect(early.status).toBe(400);
    expect(early.body.error).toMatch(/has not completed yet; a review can only rely on a completed comparison/);
    expect(await runComparisonJobs()).toEqual([waiting.body.comparison.id]);

    const review = await request(app)
      .post(`/api/runs/${run.body.run.id}/review`)
      .set(await as('statistician'))
      .send({ verdict: 'fit for use', reasoning: 'Better than the alternative.', comparisonId: made.id });
    expect(review.status, JSON.stringify(review.body)).toBe(201);
    expect(review.body.comparisonId).toBe(made.id);
    const report = await request(app)
      .get(`/api/runs/${run.body.run.id}/report`)
      .set(await as('chair'));
    expect(report.status).toBe(200);
    expect(report.body.comparison.id).toBe(made.id);
    expect(report.body.methods.map((m: { name: string }) => m.name)).toContain('Two scores on the same patients');

    // A run on another cohort version cannot rest on it.
    const other = await request(app)
      .post('/api/runs')
      .set(await as('statistician'))
      .send({ scoreVersionId: first.scoreVersionId, cohortVersionId: otherCohort.cohortVersionId });
    while (await processNextRun());
    const wrong = await request(app)
      .post(`/api/runs/${other.body.run.id}/review`)
      .set(await as('statistician'))
      .send({ verdict: 'fit for use', reasoning: 'x', comparisonId: made.id });
    expect(wrong.status).toBe(400);
    expect(wrong.body.error).toMatch(/not on this run's cohort version/);
  });

  it('is read by result readers only', async () => {
    for (const role of ['steward', 'clinician'] as const) {
      const res = await request(app)
        .get(`/api/comparisons/${made.id}`)
        .set(await as(role));
      expect(res.status, role).toBe(403);
      const list = await request(app)
        .get('/api/comparisons')
        .set(await as(role));
      expect(list.status, role).toBe(403);
    }
  });
});

describe('creating a comparison', () => {
  const body = () => ({
    firstScoreVersionId: first.scoreVersionId,
    secondScoreVersionId: second.scoreVersionId,
    cohortVersionId: cohort.cohortVersionId,
    settings: { ...SETTINGS, bootstrapReplicates: 0 },
  });

  it('is for statisticians only', async () => {
    for (const role of ['steward', 'chair', 'admin', 'clinician'] as const) {
      const res = await create(role, body());
      expect(res.status, role).toBe(403);
    }
  });

  it('refuses the same score version twice', async () => {
    const res = await create('statistician', { ...body(), secondScoreVersionId: first.scoreVersionId });
    expect(res.status).toBe(400);
    expect(JSON.stringify(res.body)).toMatch(/two different score versions/);
  });

  it("refuses a cohort version lacking a score's columns", async () => {
    const res = await create('statistician', { ...body(), secondScoreVersionId: needsAlbumin.scoreVersionId });
    expect(res.status).toBe(400);
    expect(res.body.error).toMatch(/"albumin"/);
  });

  it('answers 404 for a score version or cohort version that does not exist', async () => {
    const missing = '00000000-0000-4000-8000-000000000000';
    expect((await create('statistician', { ...body(), firstScoreVersionId: missing })).status).toBe(404);
    expect((await create('statistician', { ...body(), cohortVersionId: missing })).status).toBe(404);
    const get = await request(app)
      .get(`/api/comparisons/${missing}`)
      .set(await as('statistician'));
    expect(get.status).toBe(404);
  });

  it('without bootstrap replicates gives the differences without intervals', async () => {
    const res = await create('statistician', body());
    expect(res.status).toBe(202);
    await runComparisonJobs();
    const done = await read(res.body.comparison.id);
    expect(done.status).toBe('completed');
    expect(done.results!.bootstrap).toBeNull();
    expect(done.results!.netBenefit[0].difference.lower).toBeNull();
  });
});

describe('a comparison waiting for its job', () => {
  let waiting: ScoreComparisonDetail;

  beforeAll(async () => {
    const res = await create('statistician', {
      firstScoreVersionId: first.scoreVersionId,
      secondScoreVersionId: second.scoreVersionId,
      cohortVersionId: otherCohort.cohortVersionId,
      settings: { ...SETTINGS, bootstrapReplicates: 0 },
    });
    expect(res.status).toBe(202);
    waiting = res.body.comparison;
  });

  it('is listed with its status and no headline', async () => {
    const list = await request(app)
      .get('/api/comparisons')
      .query({ cohortVersion: otherCohort.cohortVersionId })
      .set(await as('chair'));
    expect(list.body.comparisons).toEqual([
      expect.objectContaining({ id: waiting.id, status: 'queued', headline: null, engineVersion: null }),
    ]);
  });

  it('cannot be computed again before it has completed', async () => {
    const res = await request(app)
      .post(`/api/comparisons/${waiting.id}/reproduce`)
      .set(await as('admin'));
    expect(res.status).toBe(409);
    expect(res.body.error).toMatch(/has not been computed yet/);
  });

  it('moves only forward: what it compares is fixed, it never goes back to waiting, and progress never falls', async () => {
    await refusedTwice(
      `UPDATE score_comparisons SET settings = '{}' WHERE id = $1`,
      [waiting.id],
      /fixed when it is queued/,
    );
    await ownerQuery(`UPDATE score_comparisons SET status = 'running', progress = 0.5 WHERE id = $1`, [waiting.id]);
    await expect(ownerQuery(`UPDATE score_comparisons SET progress = 0.2 WHERE id = $1`, [waiting.id])).rejects.toThrow(
      /only moves forward/,
    );
    await expect(
      ownerQuery(`UPDATE score_comparisons SET status = 'queued' WHERE id = $1`, [waiting.id]),
    ).rejects.toThrow(/only moves forward/);
    // Completed without its results is refused by the table's check.
    await expect(
      ownerQuery(`UPDATE score_comparisons SET status = 'completed', completed_at = now() WHERE id = $1`, [waiting.id]),
    ).rejects.toThrow(/score_comparisons_outcome/);
    await refusedTwice('DELETE FROM score_comparisons WHERE id = $1', [waiting.id], /append-only/);
  });

  it('fails with the reason when its inputs cannot be computed, and a failed one never changes', async () => {
    const inputError: ComputeComparison = async () => ({
      ok: false,
      inputError: true,
      message: 'the outcome has no events among the compared patients',
    });
    expect(await runComparisonJobs(inputError)).toEqual([waiting.id]);
    const failed = await read(waiting.id);
    expect(failed).toMatchObject({
      status: 'failed',
      error: 'the outcome has no events among the compared patients',
      results: null,
      headline: null,
    });
    expect(failed.completedAt).not.toBeNull();
    expect(await auditActions(waiting.id)).toEqual(['comparison.created', 'comparison.failed']);
    await expect(
      ownerQuery(`UPDATE score_comparisons SET error = 'other' WHERE id = $1`, [waiting.id]),
    ).rejects.toThrow(/failed and its record is append-only/);
    const rep = await request(app)
      .post(`/api/comparisons/${waiting.id}/reproduce`)
      .set(await as('admin'));
    expect(rep.status).toBe(409);
    expect(rep.body.error).toMatch(/failed/);
  });
});

describe('a comparison whose process stopped', () => {
  const body = () => ({
    firstScoreVersionId: second.scoreVersionId,
    secondScoreVersionId: first.scoreVersionId,
    cohortVersionId: otherCohort.cohortVersionId,
    settings: { ...SETTINGS, bootstrapReplicates: 0 },
  });
  /** The job pg-boss hands a worker; retryCount 1 is the retry after a process died. */
  const jobOf = (comparisonId: string, retryCount: number) =>
    ({
      id: `test-${comparisonId}`,
      name: 'comparison',
      data: { comparisonId },
      retryCount,
      retryLimit: 1,
    }) as unknown as Parameters<JobHandler<{ comparisonId: string }>>[0];

  it('is computed again by the retry of its job, once; a later delivery stores nothing more', async () => {
    const res = await create('statistician', body());
    const id = res.body.comparison.id as string;
    // The first attempt's process died after claiming it: the row says running, half way.
    await ownerQuery(`UPDATE score_comparisons SET status = 'running', progress = 0.4 WHERE id = $1`, [id]);
    const job = comparisonJobWith();
    await job(jobOf(id, 1));
    const done = await read(id);
    expect(done.status).toBe('completed');
    await job(jobOf(id, 1));
    const again = await read(id);
    expect(again.resultsSha256).toBe(done.resultsSha256);
    expect(again.completedAt).toBe(done.completedAt);
    expect(await auditActions(id)).toEqual(['comparison.created', 'comparison.requeued', 'comparison.completed']);
    // Its own queued job finds it completed and does nothing.
    expect(await runComparisonJobs()).toEqual([id]);
    expect(await auditActions(id)).toHaveLength(3);
  });

  it('is marked failed by the dead-letter job when every attempt was cut off', async () => {
    const res = await create('statistician', body());
    const id = res.body.comparison.id as string;
    const cutOff: ComputeComparison = async () => {
      throw new Error('the worker thread stopped');
    };
    // First attempt, its retry, then the dead-letter job (processNextComparison runs that too).
    expect(await runComparisonJobs(cutOff)).toEqual([id, id]);
    const failed = await read(id);
    expect(failed.status).toBe('failed');
    expect(failed.error).toMatch(/cut off 2 times/);
    expect(await auditActions(id)).toEqual(['comparison.created', 'comparison.requeued', 'comparison.failed']);
  });
});
