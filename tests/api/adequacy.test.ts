// "Is the cohort big enough?" in the API: the run and the cohort-version responses carry `adequacy` — the shared
// verdict (100/100 minimum, Vergouwe et al. 2005; 200/200 preferred, Collins et al. 2016) and the expected 95% CI
// widths by the formulas of Riley et al. (2021), which must equal precisionFor on the same counts and AUC.
// Fixture data are invented (tests/helpers/fixtures.ts).
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CohortAdequacy } from '@shared/adequacy';
import type { RunDetail } from '@shared/runs';
import { stopBackgroundServices } from '../../server/src/jobs/background';
import {
  forgetCachedPrecision,
  cachedPrecision,
  ciWidthsComputedHere,
} from '../../server/src/domain/runs/adequacyPrecision';
import { warmRunCiWidths } from '../../server/src/domain/runs/adequacyWidths';
import { processNextRun } from '../../server/src/domain/runs/runQueue';
import { precisionFor } from '../../server/src/stats/sampleSize';
import { app, bearer, dataSource, DEMO_PASSWORD, tokenFor, useDatabase } from '../helpers/api';
import {
  createCohortFixture,
  createScoreFixture,
  kestrelRows,
  type CohortFixture,
  type ScoreFixture,
} from '../helpers/fixtures';

useDatabase();

let score: ScoreFixture;
let cohort: CohortFixture;
let tiny: CohortFixture;
let sibling: CohortFixture; // a cohort of the fixture score with no run of its own

/** A cohort version with counts only (adequacy reads no rows), tied to a score. */
async function countsOnlyCohort(scoreId: string, rowCount: number, events: number): Promise<CohortFixture> {
  const [c]: { id: string }[] = await dataSource.query(
    `INSERT INTO cohorts (name, description, score_id) VALUES ($1, 'fixture', $2) RETURNING id`,
    [`Adequacy sibling ${Math.random().toString(36).slice(2, 10)}`, scoreId],
  );
  const [v]: { id: string }[] = await dataSource.query(
    `INSERT INTO cohort_versions (cohort_id, version, label, source_filename, source_sha256, source_bytes, row_count, events, mapping)
     VALUES ($1, 1, 'counts only', 'fixture.csv', repeat('0', 64), 0, $2, $3, '{}'::jsonb) RETURNING id`,
    [c.id, rowCount, events],
  );
  return { cohortId: c.id, cohortVersionId: v.id, rows: [] };
}

async function cohortVersion(c: CohortFixture, role: 'statistician' | 'steward' = 'statistician') {
  const res = await request(app)
    .get(`/api/cohorts/${c.cohortId}/versions/1`)
    .set(bearer(await tokenFor(role)));
  expect(res.status).toBe(200);
  return res.body.version as { rowCount: number; events: number; adequacy: CohortAdequacy };
}

beforeAll(async () => {
  while (await processNextRun()); // nothing from an earlier file left waiting
  score = await createScoreFixture();
  cohort = await createCohortFixture(kestrelRows(1200, 41));
  // 150 patients with exactly 100 events and 50 non-events: the minimum is met for events only.
  tiny = await createCohortFixture(kestrelRows(150, 42).map((r, i) => ({ ...r, outcome: i < 100 ? 1 : 0 })));
  sibling = await countsOnlyCohort(score.scoreId, 800, 199);
});

afterAll(async () => {
  await stopBackgroundServices();
});

describe('adequacy on a cohort version', () => {
  it('without any run: the counts, the verdict and widths for an AUC that is said to be assumed', async () => {
    const v = await cohortVersion(cohort);
    const a = v.adequacy;
    expect(a.n).toBe(v.rowCount);
    expect(a.events).toBe(v.events);
    expect(a.nonEvents).toBe(v.rowCount - v.events);
    expect(a.verdict.meetsMinimum).toBe(a.events >= 100 && a.nonEvents >= 100);
    expect(a.verdict.meetsPreferred).toBe(a.events >= 200 && a.nonEvents >= 200);
    expect(a.auc).toEqual({ value: 0.75, source: 'assumed', runId: null });
    const p = precisionFor(a.n, a.events / a.n, 0.75); // Riley et al. 2021 formulas, server/src/stats/sampleSize.ts
    expect(a.precision.oe).toBeCloseTo(p.oe, 12);
    expect(a.precision.auc).toBeCloseTo(p.auc, 12);
    expect(a.precision.slope).toBeCloseTo(p.slope!, 12);
    expect(a.assumption).toMatch(/well calibrated/);
  });

  it('says a cohort with too few non-events is below the minimum', async () => {
    const a = (await cohortVersion(tiny, 'steward')).adequacy;
    expect(a.events).toBe(100);
    expect(a.nonEvents).toBe(50);
    expect(a.verdict.level).toBe('short');
    expect(a.verdict.missingForMinimum).toEqual({ events: 0, nonEvents: 50 });
    expect(a.verdict.message).toMatch(/50 more non-events/);
  });
});

describe('adequacy on a run', () => {
  let run: RunDetail;
  let keptBeforeOpening = false;

  beforeAll(async () => {
    const res = await request(app)
      .post('/api/runs')
      .set(bearer(await tokenFor('statistician')))
      .send({ scoreVersionId: score.scoreVersionId, cohortVersionId: cohort.cohortVersionId, settings: {} });
    expect(res.status).toBe(201);
    expect(res.body.run.adequacy ?? null, 'a queued run has no adequacy yet').toBeNull();
    while (await processNextRun());
    // The widths were worked out in the run's own thread, before anyone opened the page (not on the API thread).
    const [stored] = await dataSource.query(
      `SELECT (results->'overall'->>'n')::int AS n, (results->'overall'->>'events')::int AS events,
      (results->'overall'->'auc'->>'estimate')::float8 AS auc FROM validation_runs WHERE id = $1`,
      [res.body.run.id],
    );
    keptBeforeOpening = cachedPrecision(stored.n, stored.events, stored.auc) !== undefined;
    const got = await request(app)
      .get(`/api/runs/${res.body.run.id}`)
      .set(bearer(await tokenFor('statistician')));
    expect(got.status).toBe(200);
    run = got.body.run as RunDetail;
    expect(run.status).toBe('completed');
  });

  it('carries the run’s own counts and AUC, and widths equal to precisionFor on them', () => {
    const o = run.results!.overall;
    const a = run.adequacy!;
    expect(a.n).toBe(o.n);
    expect(a.events).toBe(o.events);
    expect(a.nonEvents).toBe(o.nonEvents);
    expect(a.auc).toEqual({ value: o.auc.estimate, source: 'this run', runId: run.id });
    const p = precisionFor(o.n, o.events / o.n, o.auc.estimate);
    expect(a.precision.oe).toBeCloseTo(p.oe, 12);
    expect(a.precision.auc).toBeCloseTo(p.auc, 12);
    expect(a.precision.slope).toBeCloseTo(p.slope!, 12);
    expect(a.verdict.level).toBe(
      o.events >= 200 && o.nonEvents >= 200 ? 'preferred' : o.events >= 100 && o.nonEvents >= 100 ? 'minimum' : 'short',
    );
  });

  it('has its widths from the run thread, kept before the run page was first opened', () => {
    expect(keptBeforeOpening).toBe(true);
  });

  it('with no widths kept (as after a restart) the run page gets them from the widths thread, not the API thread', async () => {
    const o = run.results!.overall;
    forgetCachedPrecision();
    const before = ciWidthsComputedHere();
    const got = await request(app)
      .get(`/api/runs/${run.id}`)
      .set(bearer(await tokenFor('statistician')));
    expect(got.status).toBe(200);
    expect((got.body.run as RunDetail).adequacy!.precision).toEqual(run.adequacy!.precision);
    expect(ciWidthsComputedHere(), 'widths worked out on the API thread').toBe(before);
    expect(cachedPrecision(o.n, o.events, o.auc.estimate)).toEqual(run.adequacy!.precision);
  });

  it('at start the widths of the newest completed runs are worked out in that thread, before any page asks', async () => {
    const o = run.results!.overall;
    forgetCachedPrecision();
    const before = ciWidthsComputedHere();
    await warmRunCiWidths(5); // this file just completed the run: it is among the newest
    expect(cachedPrecision(o.n, o.events, o.auc.estimate)).toEqual(run.adequacy!.precision);
    expect(ciWidthsComputedHere()).toBe(before);
  });

  it('the expected AUC width is of the size the run’s own DeLong CI has', () => {
    // Riley et al.'s SE(C) approximates the DeLong SE the run reports; same order, not equal (common practice, no source)
    const o = run.results!.overall;
    const ratio = run.adequacy!.precision.auc! / (o.auc.upper - o.auc.lower);
    expect(ratio).toBeGreaterThan(0.7);
    expect(ratio).toBeLessThan(1.4);
  });

  it('the cohort version now takes its AUC from that run', async () => {
    const a = (await cohortVersion(cohort)).adequacy;
    expect(a.auc.source).toBe('run on this cohort version');
    expect(a.auc.runId).toBe(run.id);
    expect(a.auc.value).toBe(run.results!.overall.auc.estimate);
  });

  it('a cohort of the same score without a run of its own borrows the AUC of the score’s latest run, then of its approved run', async () => {
    const before = (await cohortVersion(sibling)).adequacy;
    expect(before.verdict.level).toBe('minimum'); // 199 events: one short of the preferred 200
    expect(before.verdict.missingForPreferred).toEqual({ events: 1, nonEvents: 0 });
    expect(before.auc).toEqual({
      value: run.results!.overall.auc.estimate,
      source: 'latest run of the score',
      runId: run.id,
    });
    const p = precisionFor(800, 199 / 800, run.results!.overall.auc.estimate);
    expect(before.precision.slope).toBeCloseTo(p.slope!, 12);

    // review and sign the run: it becomes the approved run of the score version
    const review = await request(app)
      .post(`/api/runs/${run.id}/review`)
      .set(bearer(await tokenFor('statistician')))
      .send({ verdict: 'fit for use', reasoning: 'adequacy fixture' });
    expect(review.status).toBe(201);
    const sign = await request(app)
      .post(`/api/runs/${run.id}/signoff`)
      .set(bearer(await tokenFor('chair')))
      .send({ decision: 'approve', password: DEMO_PASSWORD });
    expect(sign.status).toBe(201);
    const after = (await cohortVersion(sibling)).adequacy;
    expect(after.auc).toEqual({
      value: run.results!.overall.auc.estimate,
      source: 'approved run of the score',
      runId: run.id,
    });
  });

  it('is not part of the sealed results, and the comparison leaves it out', async () => {
    expect((run.results as unknown as Record<string, unknown>).adequacy).toBeUndefined();
    const cmp = await request(app)
      .get('/api/runs/compare')
      .query({ a: run.id, b: run.id })
      .set(bearer(await tokenFor('statistician')));
    expect(cmp.status).toBe(200);
    expect(cmp.body.a.adequacy).toBeUndefined();
  });
});
