// The drift timeline takes one run per cohort version (the one the statistician chose, else the newest completed),
// orders its points by period, says which run each point comes from, and counts each patient once in the cumulative
// O − E and the CUSUM. A half-year cohort among quarterly ones is labelled as a half-year.
import request from 'supertest';
import { beforeAll, describe, expect, it } from 'vitest';
import type { DriftResponse } from '@shared/drift';
import { runSettingsSchema } from '@shared/runs';
import { recordRunNow } from '../../server/src/domain/runs/runQueue';
import { app, bearer, dataSource, tokenFor, useDatabase } from '../helpers/api';
import { createCohortFixture, createScoreFixture, kestrelRows, type ScoreFixture } from '../helpers/fixtures';

useDatabase();

type Row = ReturnType<typeof kestrelRows>[number];
/** Rows dated within [first month, first month + months) of 2024 (kestrelRows dates them from January 2024). */
const datedFrom = (rows: Row[], firstMonth: number): Row[] =>
  rows.map((r) => {
    const [y, m, d] = String(r.eventDate).split('-').map(Number);
    return { ...r, eventDate: new Date(Date.UTC(y, m - 1 + firstMonth, d)).toISOString().slice(0, 10) };
  });

let score: ScoreFixture;
const cv: Record<'q1' | 'q2' | 'h2', string> = { q1: '', q2: '', h2: '' };
const runs: Record<'q1first' | 'q1again' | 'q2' | 'h2', string> = { q1first: '', q1again: '', q2: '', h2: '' };
const sizes = { q1: 300, q2: 250, h2: 400 };

const timeline = async (): Promise<DriftResponse> => {
  const res = await request(app)
    .get(`/api/scores/${score.scoreId}/versions/1/drift`)
    .set(bearer(await tokenFor('statistician')));
  expect(res.status).toBe(200);
  return res.body as DriftResponse;
};
const choose = async (
  body: { cohortVersionId: string; runId: string | null },
  role: 'statistician' | 'chair' | 'steward' = 'statistician',
) =>
  request(app)
    .put(`/api/scores/${score.scoreId}/versions/1/drift/runs`)
    .set(bearer(await tokenFor(role)))
    .send(body);

beforeAll(async () => {
  score = await createScoreFixture({ name: `Drift runs fixture ${Date.now()}` });
  const settings = runSettingsSchema.parse({});
  // Stored out of period order on purpose: the half-year first, then Q2, then Q1.
  cv.h2 = (
    await createCohortFixture(datedFrom(kestrelRows(sizes.h2, 31, { months: 6 }), 6), {
      label: 'second half',
      periodStart: '2024-07-01',
      periodEnd: '2024-12-31',
    })
  ).cohortVersionId;
  cv.q2 = (
    await createCohortFixture(datedFrom(kestrelRows(sizes.q2, 32, { months: 3 }), 3), {
      label: 'spring',
      periodStart: '2024-04-01',
      periodEnd: '2024-06-30',
    })
  ).cohortVersionId;
  cv.q1 = (
    await createCohortFixture(kestrelRows(sizes.q1, 33, { months: 3 }), {
      label: 'winter',
      periodStart: '2024-01-01',
      periodEnd: '2024-03-31',
    })
  ).cohortVersionId;
  runs.q1first = await recordRunNow(null, score.scoreVersionId, cv.q1, settings);
  runs.h2 = await recordRunNow(null, score.scoreVersionId, cv.h2, settings);
  runs.q2 = await recordRunNow(null, score.scoreVersionId, cv.q2, settings);
  // The same cohort version run again: it must not put its patients on the timeline twice.
  runs.q1again = await recordRunNow(null, score.scoreVersionId, cv.q1, settings);
}, 120_000);

describe('drift timeline: one run per cohort version', () => {
  it('orders by period, takes the newest run of a re-run cohort version and says so', async () => {
    const body = await timeline();
    expect(body.periods.map((p) => p.cohortVersionId)).toEqual([cv.q1, cv.q2, cv.h2]);
    expect(body.periods.map((p) => p.runId)).toEqual([runs.q1again, runs.q2, runs.h2]);
    expect(body.periods[0]).toMatchObject({ runChoice: 'newest', otherRuns: 1, runNumber: 4 });
    expect(body.periods[0].runsOfCohortVersion.map((r) => [r.runId, r.runNumber])).toEqual([
      [runs.q1first, 1],
      [runs.q1again, 4],
    ]);
    expect(body.periods[1]).toMatchObject({ runChoice: 'newest', otherRuns: 0, runNumber: 3 });
    expect(body.periods.map((p) => p.period)).toEqual([
      { label: '2024-Q1', kind: 'quarter', months: 3 },
      { label: '2024-Q2', kind: 'quarter', months: 3 },
      { label: '2024-H2', kind: 'half', months: 6 },
    ]);
    expect(body.reference?.runId).toBe(runs.q1again);
  });

  it('counts each patient once in the cumulative O − E and the CUSUM', async () => {
    const body = await timeline();
    const patients = sizes.q1 + sizes.q2 + sizes.h2;
    expect(body.periods.reduce((s, p) => s + p.n, 0)).toBe(patients);
    const oe = body.observedMinusExpected.points;
    expect(oe[oe.length - 1].index).toBe(patients - 1);
    // The cumulative O − E ends at Σ(O − E) of the periods shown.
    const total = body.periods.reduce((s, p) => s + p.observed - p.expected, 0);
    expect(oe[oe.length - 1].value).toBeCloseTo(total, 6);
    expect(body.cusum.points[body.cusum.points.length - 1].index).toBe(patients - 1);
  });

  it('the statistician chooses another run of a cohort version; the choice is stored and audited, and can be undone', async () => {
    expect((await choose({ cohortVersionId: cv.q1, runId: runs.q1first }, 'chair')).status).toBe(403);
    expect((await choose({ cohortVersionId: cv.q1, runId: runs.q1first }, 'steward')).status).toBe(403);
    // A run of another cohort version cannot stand for this one.
    const wrong = await choose({ cohortVersionId: cv.q1, runId: runs.q2 });
    expect(wrong.status).toBe(400);

    const res = await choose({ cohortVersionId: cv.q1, runId: runs.q1first });
    expect(res.status, JSON.stringify(res.body)).toBe(200);
    let body = await timeline();
    expect(body.periods.map((p) => p.runId)).toEqual([runs.q1first, runs.q2, runs.h2]);
    expect(body.periods[0]).toMatchObject({ runChoice: 'chosen', otherRuns: 1, runNumber: 1 });
    const [stored] = await dataSource.query(
      'SELECT run_id FROM drift_run_choices WHERE score_version_id = $1 AND cohort_version_id = $2',
      [score.scoreVersionId, cv.q1],
    );
    expect(stored.run_id).toBe(runs.q1first);
    const audit: { details: Record<string, unknown> }[] = await dataSource.query(
      `SELECT details FROM audit_log WHERE action = 'drift.run.chosen' AND target_id = $1 ORDER BY seq`,
      [score.scoreVersionId],
    );
    expect(audit.at(-1)?.details).toMatchObject({ cohortVersionId: cv.q1, runId: runs.q1first, previousRunId: null });

    expect((await choose({ cohortVersionId: cv.q1, runId: null })).status).toBe(200);
    body = await timeline();
    expect(body.periods[0]).toMatchObject({ runId: runs.q1again, runChoice: 'newest' });
  });
});
