// Drift API (so far: the sample-size planner) — roles and the Riley et al. (2021) numbers through HTTP.
import { execFileSync } from 'node:child_process';
import { randomUUID } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import request from 'supertest';
import { beforeAll, describe, expect, it } from 'vitest';
import type { AlertView, Derivation, DriftResponse } from '@shared/drift';
import type { ScoreModel } from '@shared/model';
import { runSettingsSchema } from '@shared/runs';
import { evaluateAlertsForRun, evaluateAlertsForVersion } from '../../server/src/domain/drift/alerts';
import { fitsMadeHere } from '../../server/src/domain/drift/recalibrationFit';
import { processNextRun, recordRunNow } from '../../server/src/domain/runs/runQueue';
import { planSampleSize } from '../../server/src/stats/sampleSize';
import { app, bearer, dataSource, refusedTwice, tokenFor, useDatabase } from '../helpers/api';
import {
  createCohortFixture,
  createScoreFixture,
  FIXTURE_MODEL,
  kestrelRows,
  type ScoreFixture,
} from '../helpers/fixtures';

useDatabase();

describe('GET /api/sample-size', () => {
  it('returns n per criterion and the largest for a statistician', async () => {
    const res = await request(app)
      .get('/api/sample-size?eventRate=0.018&auc=0.8&ciWidthAuc=0.1&ciWidthOE=1')
      .set(bearer(await tokenFor('statistician')));
    expect(res.status).toBe(200);
    const auc = res.body.criteria.find((c: { criterion: string }) => c.criterion === 'auc');
    expect(auc.n).toBe(4252); // docs/references.md [ref], Riley et al. 2021: φ = 0.018, C = 0.8, width 0.1
    expect(res.body.largest.criterion).toBe('auc');
  });

  it('takes the anticipated O/E and slope, a normal or beta LP distribution and the net-benefit inputs', async () => {
    const token = await tokenFor('statistician');
    const q =
      'eventRate=0.1&auc=0.75&ciWidthOE=0.3&ciWidthSlope=0.3&ciWidthNb=0.2&anticipatedOE=1.1&anticipatedSlope=0.9' +
      '&threshold=0.1&sensitivity=0.75&specificity=0.7';
    const beta = await request(app).get(`/api/sample-size?${q}&lpDistribution=beta&betaA=1&betaB=9`).set(bearer(token));
    expect(beta.status).toBe(200);
    expect(beta.body.criteria.map((c: { criterion: string }) => c.criterion)).toEqual(['oe', 'slope', 'netBenefit']);
    expect(beta.body.lpDistribution).toMatchObject({ kind: 'beta', a: 1, b: 9, slope: 0.9 });
    expect(beta.body.anticipatedOE).toBe(1.1);
    const nb = beta.body.criteria.find((c: { criterion: string }) => c.criterion === 'netBenefit');
    // n·Var(sNB) = sens(1−sens)/φ + w²·spec(1−spec)/(1−φ) + w²(1−spec)²/(φ(1−φ)), w = (1−φ)/φ·t/(1−t) (Riley et al. 2021 [mem])
    const w = 9 * (0.1 / 0.9);
    const v = (0.75 * 0.25) / 0.1 + (w * w * 0.7 * 0.3) / 0.9 + (w * w * 0.09) / (0.1 * 0.9);
    expect(nb.n).toBe(Math.ceil(v / (0.2 / 3.919927969080108) ** 2));
    const normal = await request(app)
      .get(`/api/sample-size?${q}&lpDistribution=normal&lpMean=-2.5&lpSd=1`)
      .set(bearer(token));
    expect(normal.status).toBe(200);
    expect(normal.body.lpDistribution).toMatchObject({ kind: 'normal', mean: -2.5, sd: 1 });
    const slopeOf = (b: { criteria: { criterion: string; n: number }[] }) =>
      b.criteria.find((c) => c.criterion === 'slope')!.n;
    expect(slopeOf(normal.body)).not.toBe(slopeOf(beta.body));
  });

  it("takes the LP distribution from a completed run's stored predicted risks", async () => {
    const score = await createScoreFixture({ name: `Planner fixture ${Date.now()}` });
    const rows = kestrelRows(800, 303);
    const cohort = await createCohortFixture(rows, { label: 'Planner cohort' });
    const runId = await recordRunNow(null, score.scoreVersionId, cohort.cohortVersionId, runSettingsSchema.parse({}));
    const res = await request(app)
      .get(
        `/api/sample-size?eventRate=0.1&auc=0.75&ciWidthSlope=0.3&anticipatedSlope=0.9&lpDistribution=cohort&runId=${runId}`,
      )
      .set(bearer(await tokenFor('statistician')));
    expect(res.status).toBe(200);
    expect(res.body.lpDistribution).toMatchObject({ kind: 'cohort', patients: 800, slope: 0.9 });
    // the same plan from the fixture formula evaluated here (test-side arithmetic, not the server's applyModel)
    const risks = Float64Array.from(rows, (r) => expit(lpOf(FIXTURE_MODEL, r)));
    const expected = planSampleSize({
      eventRate: 0.1,
      auc: 0.75,
      ciWidthSlope: 0.3,
      anticipatedSlope: 0.9,
      lpDistribution: 'cohort',
      risks,
    });
    expect(res.body.criteria[0].n).toBe(expected.criteria[0].n);
    const missing = await request(app)
      .get(`/api/sample-size?eventRate=0.1&auc=0.75&ciWidthSlope=0.3&lpDistribution=cohort&runId=${randomUUID()}`)
      .set(bearer(await tokenFor('statistician')));
    expect(missing.status).toBe(404);
  }, 120_000);

  it.each([
    ['lpDistribution=normal&lpMean=-2', /lpSd/],
    ['lpDistribution=beta&betaA=1', /betaA/],
    ['lpDistribution=weibull', /lpDistribution/],
    ['lpDistribution=normal&lpMean=-2&lpSd=0', /lpSd/],
    ['ciWidthNb=0.2&threshold=0.1&sensitivity=0.8', /ciWidthNb/],
    ['ciWidthNb=0.2&threshold=1&sensitivity=0.8&specificity=0.7', /threshold/],
    ['anticipatedSlope=0', /anticipatedSlope/],
    ['anticipatedOE=-1', /anticipatedOE/],
    ['lpDistribution=cohort', /runId/],
    ['lpDistribution=cohort&runId=not-a-run', /runId/],
  ])('refuses %s with 400 naming the field', async (extra, field) => {
    const res = await request(app)
      .get(`/api/sample-size?eventRate=0.1&auc=0.75&ciWidthSlope=0.3&${extra}`)
      .set(bearer(await tokenFor('statistician')));
    expect(res.status).toBe(400);
    expect(JSON.stringify(res.body)).toMatch(field);
  });

  it('refuses clinicians and anonymous callers, and bad input', async () => {
    expect(
      (
        await request(app)
          .get('/api/sample-size?eventRate=0.018&auc=0.8&ciWidthAuc=0.1')
          .set(bearer(await tokenFor('clinician')))
      ).status,
    ).toBe(403);
    expect((await request(app).get('/api/sample-size?eventRate=0.018&auc=0.8&ciWidthAuc=0.1')).status).toBe(401);
    expect(
      (
        await request(app)
          .get('/api/sample-size?eventRate=0.018&auc=0.8')
          .set(bearer(await tokenFor('steward')))
      ).status,
    ).toBe(400);
    expect(
      (
        await request(app)
          .get('/api/sample-size?eventRate=1.5&auc=0.8&ciWidthAuc=0.1')
          .set(bearer(await tokenFor('chair')))
      ).status,
    ).toBe(400);
  });
});

// ---------------------------------------------------------------- drift timeline, alerts, recalibration
// Fixture: the invented Kestrel-like formula on three consecutive invented periods; the second and third are drawn
// with a higher baseline risk (+0.7 and +0.9 on the logit scale), i.e. clear miscalibration-in-the-large on purpose.

type Row = ReturnType<typeof kestrelRows>[number];

/** Moves a row's event date on by `months` (so the three fixture periods follow one another). */
const shiftMonths = (rows: Row[], months: number): Row[] =>
  rows.map((r) => {
    const [y, m, d] = String(r.eventDate).split('-').map(Number);
    return { ...r, eventDate: new Date(Date.UTC(y, m - 1 + months, d)).toISOString().slice(0, 10) };
  });

/** The fixture formula evaluated here, independently of the server's applyModel (test-side arithmetic). */
function lpOf(model: ScoreModel, r: Row): number {
  let lp = model.intercept;
  for (const t of model.predictors) {
    const v = r.predictors[t.column];
    if (t.transform === 'linear') lp += t.coefficient * Number(v);
    else if (t.transform === 'log') lp += t.coefficient * Math.log(Number(v));
    else if (t.transform === 'indicator') lp += v === t.level ? t.coefficient : 0;
    else throw new Error(`test cannot evaluate transform ${t.transform}`);
  }
  return lp;
}
const expit = (x: number) => 1 / (1 + Math.exp(-x));

describe('drift timeline, alert rules and recalibration', () => {
  let score: ScoreFixture;
  const periods: Row[][] = [];
  const runIds: string[] = [];
  const cohortVersionIds: string[] = [];
  const startedAt = new Date();

  beforeAll(async () => {
    score = await createScoreFixture({ name: `Drift fixture ${Date.now()}` });
    const shifts = [0, 0.7, 0.9];
    for (let k = 0; k < 3; k++) {
      const rows = shiftMonths(kestrelRows(1500, 101 + k, { logitShift: shifts[k], months: 3 }), 3 * k);
      periods.push(rows);
      const cohort = await createCohortFixture(rows, { label: `P${k + 1}` });
      cohortVersionIds.push(cohort.cohortVersionId);
      runIds.push(await recordRunNow(null, score.scoreVersionId, cohort.cohortVersionId, runSettingsSchema.parse({})));
    }
  }, 120_000);

  it('lets a statistician add alert rules; others may not', async () => {
    const stat = bearer(await tokenFor('statistician'));
    for (const body of [
      { kind: 'citl-consecutive', params: { periods: 2 }, enabled: true },
      { kind: 'cusum', params: { oddsRatio: 2, h: 4.5 }, enabled: true },
      { kind: 'oe-limit', params: {}, enabled: true },
      { kind: 'auc-below', params: { threshold: 0.5 }, enabled: true },
    ]) {
      const res = await request(app).post(`/api/scores/${score.scoreId}/alert-rules`).set(stat).send(body);
      expect(res.status).toBe(201);
      expect(res.body.rule).toMatchObject({ kind: body.kind, enabled: true });
    }
    expect(
      (
        await request(app)
          .post(`/api/scores/${score.scoreId}/alert-rules`)
          .set(bearer(await tokenFor('chair')))
          .send({ kind: 'cusum', params: {} })
      ).status,
    ).toBe(403);
    expect(
      (
        await request(app)
          .post(`/api/scores/${score.scoreId}/alert-rules`)
          .set(stat)
          .send({ kind: 'sometimes', params: {} })
      ).status,
    ).toBe(400);
    const list = await request(app)
      .get(`/api/scores/${score.scoreId}/alert-rules`)
      .set(bearer(await tokenFor('chair')));
    expect(list.status).toBe(200);
    expect(list.body.rules.map((r: { kind: string }) => r.kind).sort()).toEqual([
      'auc-below',
      'citl-consecutive',
      'cusum',
      'oe-limit',
    ]);
  });

  it('raises alerts on the miscalibrated periods once, and e-mails the statisticians', async () => {
    const raised = await evaluateAlertsForVersion(score.scoreVersionId);
    const got = raised.map((a) => `${a.ruleKind}:${a.period}`).sort();
    // P2 and P3 carry +0.7/+0.9 on the logit scale: O − E far beyond 3.09·√Σp(1−p); CITL excludes 0 in both.
    expect(got).toEqual(expect.arrayContaining(['citl-consecutive:P3', 'oe-limit:P2', 'oe-limit:P3']));
    expect(got).not.toContain('oe-limit:P1');
    expect(got.some((g) => g.startsWith('cusum:'))).toBe(true);
    // AUC of the formula on its own data is far above 0.5: that rule must stay quiet.
    expect(got.some((g) => g.startsWith('auc-below:'))).toBe(false);
    expect(await evaluateAlertsForVersion(score.scoreVersionId)).toEqual([]);
    expect(await evaluateAlertsForRun(runIds[2])).toEqual([]);

    const mails: { recipients: string[]; subject: string; text: string }[] = await dataSource.query(
      `SELECT recipients, subject, text FROM email_outbox WHERE kind = 'drift-alert' AND created_at >= $1 AND subject LIKE $2`,
      [startedAt, '%Drift fixture%'],
    );
    expect(mails).toHaveLength(1);
    expect(mails[0].recipients).toContain('statistician@demo.test');
    expect(mails[0].text).toContain('oe-limit');
    const audit: unknown[] = await dataSource.query(
      `SELECT 1 FROM audit_log WHERE action = 'drift_alert.raised' AND target_id = $1`,
      [raised[0].id],
    );
    expect(audit.length).toBeGreaterThan(0);
  });

  it('returns the drift timeline with funnel limits, CUSUM and O − E checked by hand', async () => {
    const res = await request(app)
      .get(`/api/scores/${score.scoreId}/versions/1/drift`)
      .set(bearer(await tokenFor('steward')));
    expect(res.status).toBe(200);
    const body = res.body as DriftResponse;
    expect(body.versionId).toBe(score.scoreVersionId);
    expect(body.periods.map((p) => p.label)).toEqual(['P1', 'P2', 'P3']);
    expect(body.reference?.runId).toBe(runIds[0]);
    let sumY = 0;
    let sumP = 0;
    periods.forEach((rows, k) => {
      // Funnel limits (Spiegelhalter 2005): O − E ± z·√Σp(1−p), z = 3.090 for 99.8%; recomputed here from the rows.
      let o = 0;
      let e = 0;
      let v = 0;
      for (const r of rows) {
        const p = expit(lpOf(FIXTURE_MODEL, r));
        o += r.outcome;
        e += p;
        v += p * (1 - p);
      }
      sumY += o;
      sumP += e;
      const q = body.periods[k];
      expect(q.n).toBe(rows.length);
      expect(q.observed).toBe(o);
      expect(q.expected).toBeCloseTo(e, 6);
      expect(q.funnel.oMinusE).toBeCloseTo(o - e, 6);
      expect(q.funnel.upper998).toBeCloseTo(3.090232306167813 * Math.sqrt(v), 6); // z(0.999) [mem], common practice
      expect(q.funnel.lower95).toBeCloseTo(-1.959963984540054 * Math.sqrt(v), 6);
    });
    expect(body.periods[0].funnel.status).not.toBe('outside');
    expect(body.periods[1].funnel.status).toBe('outside');
    expect(body.periods[2].funnel.status).toBe('outside');
    // Cumulative O − E ends at Σy − Σp over all patients.
    const oePts = body.observedMinusExpected.points;
    expect(oePts[oePts.length - 1].value).toBeCloseTo(sumY - sumP, 6);
    expect(oePts[oePts.length - 1].index).toBe(4499);
    // Dates ascend along the per-patient series.
    const dates = oePts.map((p) => p.date!);
    expect([...dates].sort()).toEqual(dates);
    expect(body.cusum).toMatchObject({ oddsRatio: 2, h: 4.5, improvement: { oddsRatio: 0.5 } });
    expect(body.cusum.signals.length).toBeGreaterThan(0);
    // The first signal falls after the well-calibrated first period has begun to give way (dates of P2 or later).
    expect(body.cusum.signals[body.cusum.signals.length - 1].date! >= '2024-04-01').toBe(true);
    expect(body.cusum.points.every((p) => p.value >= 0 && p.value <= 4.5 + 3)).toBe(true);
    expect(body.alerts.length).toBeGreaterThanOrEqual(3);
    expect(body.alerts[0]).toMatchObject({ scoreId: score.scoreId, version: 1, acknowledgedAt: null });

    expect(
      (
        await request(app)
          .get(`/api/scores/${score.scoreId}/versions/1/drift`)
          .set(bearer(await tokenFor('clinician')))
      ).status,
    ).toBe(403);
    expect(
      (
        await request(app)
          .get(`/api/scores/${score.scoreId}/versions/9/drift`)
          .set(bearer(await tokenFor('statistician')))
      ).status,
    ).toBe(404);
  });

  it('reads per-patient series stored with each run (immutable), and works one out in the run thread where none is stored', async () => {
    const stored: { cohort_version_id: string; run_id: string; n: number }[] = await dataSource.query(
      'SELECT cohort_version_id, run_id, n FROM drift_series WHERE score_version_id = $1 ORDER BY n, cohort_version_id',
      [score.scoreVersionId],
    );
    expect(stored.map((r) => [r.cohort_version_id, r.run_id, r.n]).sort()).toEqual(
      cohortVersionIds.map((id, k) => [id, runIds[k], 1500]).sort(),
    );
    // The runtime role has no grant to change them, and the owner meets the trigger.
    await refusedTwice(
      'UPDATE drift_series SET variance = 0 WHERE score_version_id = $1',
      [score.scoreVersionId],
      /not allowed/,
    );
    await refusedTwice('DELETE FROM drift_series WHERE score_version_id = $1', [score.scoreVersionId], /not allowed/);

    // The same formula as another score, with a completed run inserted straight into the table (as a run stored before
    // series were kept): the first drift read works its series out, with the same figures as the stored one.
    const other = await createScoreFixture({ name: `Drift fixture without series ${Date.now()}` });
    await dataSource.query(
      `INSERT INTO validation_runs (score_version_id, cohort_version_id, settings, status, progress, results, engine_version, inputs_sha256, results_sha256, finished_at)
       SELECT $1, cohort_version_id, settings, 'completed', 1, results, engine_version, md5(random()::text) || md5(random()::text), md5(random()::text) || md5(random()::text), now()
       FROM validation_runs WHERE id = $2`,
      [other.scoreVersionId, runIds[0]],
    );
    expect(
      await dataSource.query('SELECT 1 FROM drift_series WHERE score_version_id = $1', [other.scoreVersionId]),
    ).toHaveLength(0);
    const res = await request(app)
      .get(`/api/scores/${other.scoreId}/versions/1/drift`)
      .set(bearer(await tokenFor('statistician')));
    expect(res.status).toBe(200);
    const mine = (
      await request(app)
        .get(`/api/scores/${score.scoreId}/versions/1/drift`)
        .set(bearer(await tokenFor('statistician')))
    ).body as DriftResponse;
    expect((res.body as DriftResponse).periods[0].funnel).toEqual(mine.periods[0].funnel);
    const made: { run_id: string | null; n: number }[] = await dataSource.query(
      'SELECT run_id, n FROM drift_series WHERE score_version_id = $1',
      [other.scoreVersionId],
    );
    expect(made).toEqual([{ run_id: null, n: 1500 }]);
  });

  it('lists alerts for statistician, chair and admin only, and acknowledges each once', async () => {
    for (const role of ['steward', 'clinician'] as const)
      expect(
        (
          await request(app)
            .get('/api/alerts')
            .set(bearer(await tokenFor(role)))
        ).status,
      ).toBe(403);
    const list = await request(app)
      .get('/api/alerts')
      .set(bearer(await tokenFor('admin')));
    expect(list.status).toBe(200);
    const mine = (list.body.alerts as AlertView[]).filter((a) => a.scoreId === score.scoreId);
    expect(mine.length).toBeGreaterThanOrEqual(3);
    const target = mine.find((a) => a.ruleKind === 'oe-limit')!;
    expect(target.message).toMatch(/outside the 99\.8% limits/);

    expect(
      (
        await request(app)
          .post(`/api/alerts/${target.id}/acknowledge`)
          .set(bearer(await tokenFor('steward')))
          .send({ note: 'seen' })
      ).status,
    ).toBe(403);
    expect(
      (
        await request(app)
          .post(`/api/alerts/${target.id}/acknowledge`)
          .set(bearer(await tokenFor('chair')))
          .send({ note: '' })
      ).status,
    ).toBe(400);
    const ack = await request(app)
      .post(`/api/alerts/${target.id}/acknowledge`)
      .set(bearer(await tokenFor('chair')))
      .send({ note: 'Case-mix change on Cedar unit; recalibration proposed.' });
    expect(ack.status).toBe(200);
    expect(ack.body.alert).toMatchObject({
      id: target.id,
      ackNote: 'Case-mix change on Cedar unit; recalibration proposed.',
    });
    expect(ack.body.alert.acknowledgedAt).toBeTruthy();
    expect(ack.body.alert.acknowledgedBy).toBeTruthy();
    const again = await request(app)
      .post(`/api/alerts/${target.id}/acknowledge`)
      .set(bearer(await tokenFor('statistician')))
      .send({ note: 'again' });
    expect(again.status).toBe(409);
    expect(
      (
        await request(app)
          .post('/api/alerts/00000000-0000-4000-8000-000000000000/acknowledge')
          .set(bearer(await tokenFor('chair')))
          .send({ note: 'x' })
      ).status,
    ).toBe(404);
  });

  it('recalibrates a completed run into a draft version whose formula reproduces the recalibrated predictions', async () => {
    const runId = runIds[2];
    for (const role of ['steward', 'chair', 'admin', 'clinician'] as const)
      expect(
        (
          await request(app)
            .post(`/api/runs/${runId}/recalibrate`)
            .set(bearer(await tokenFor(role)))
            .send({ method: 'logistic' })
        ).status,
      ).toBe(403);
    const stat = bearer(await tokenFor('statistician'));
    expect((await request(app).post(`/api/runs/${runId}/recalibrate`).set(stat).send({ method: 'cubic' })).status).toBe(
      400,
    );

    const fitsBefore = fitsMadeHere();
    const preview = await request(app)
      .post(`/api/runs/${runId}/recalibration-preview`)
      .set(stat)
      .send({ method: 'closed-test' });
    expect(preview.status).toBe(200);
    expect(fitsMadeHere(), 'the preview was fitted on the API thread, not in the pool').toBe(fitsBefore);
    // A pure shift of +0.9 on the logit scale: closed testing rejects "original" and keeps the intercept update
    // unless the slope clearly differs from 1 (Vergouwe et al. 2017); either way not the original score.
    expect(preview.body.derivation.chosen).not.toBe('original');
    expect(preview.body.derivation.lrTests[0].pValue).toBeLessThan(0.001);

    const before = Number(
      (await dataSource.query('SELECT count(*) AS n FROM score_versions WHERE score_id = $1', [score.scoreId]))[0].n,
    );
    const res = await request(app).post(`/api/runs/${runId}/recalibrate`).set(stat).send({ method: 'logistic' });
    expect(res.status).toBe(201);
    expect(fitsMadeHere(), 'the proposal was fitted on the API thread, not in the pool').toBe(fitsBefore);
    expect(res.body.banner).toBe(
      'Draft: this recalibrated version must be validated on different data (a later period) and signed off before clinical use.',
    );
    const v = res.body.version;
    expect(v).toMatchObject({ scoreId: score.scoreId, version: before + 1, derivedFromRunId: runId });
    const d = res.body.derivation as Derivation;
    expect(d.chosen).toBe('logistic');
    // Data drawn with a + b·lp, a = 0.9 and b = 1: both lie within the fitted 95% CIs.
    expect(d.intercept.lower).toBeLessThan(0.9);
    expect(d.intercept.upper).toBeGreaterThan(0.9);
    expect(d.slope!.lower).toBeLessThan(1);
    expect(d.slope!.upper).toBeGreaterThan(1);
    // The intercept update alone (lp as offset) recovers the shift of 0.9 within its CI too.
    const shift = (
      await request(app).post(`/api/runs/${runId}/recalibration-preview`).set(stat).send({ method: 'intercept' })
    ).body.derivation as Derivation;
    expect(shift.slope).toBeNull();
    expect(shift.intercept.lower).toBeLessThan(0.9);
    expect(shift.intercept.upper).toBeGreaterThan(0.9);
    expect(Math.abs(d.after.citl!.estimate)).toBeLessThan(1e-6); // ML fit with an intercept: CITL after is 0 (score equation)
    const a = d.intercept.estimate;
    const b = d.slope!.estimate;
    for (const r of periods[2]) {
      const recal = expit(a + b * lpOf(FIXTURE_MODEL, r));
      expect(expit(lpOf(v.model as ScoreModel, r))).toBeCloseTo(recal, 12);
    }

    // The same fit from statsmodels (Debian python3-statsmodels): Logit(y ~ 1 + lp), maximum likelihood.
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-recal-'));
    const csv = join(dir, 'lp.csv');
    writeFileSync(csv, periods[2].map((r) => `${lpOf(FIXTURE_MODEL, r)},${r.outcome}`).join('\n'));
    const py = `import numpy as np, statsmodels.api as sm\nd=np.loadtxt('${csv}',delimiter=',')\nm=sm.Logit(d[:,1],sm.add_constant(d[:,0])).fit(disp=0,tol=1e-12)\nprint(m.params[0],m.params[1],m.bse[0],m.bse[1])`;
    const [sa, sb, sea, seb] = execFileSync('/usr/bin/python3', ['-c', py], { encoding: 'utf8' })
      .trim()
      .split(/\s+/)
      .map(Number);
    rmSync(dir, { recursive: true, force: true });
    expect(a).toBeCloseTo(sa, 6);
    expect(b).toBeCloseTo(sb, 6);
    expect((d.intercept.upper - d.intercept.lower) / (2 * 1.959963984540054)).toBeCloseTo(sea, 5);
    expect((d.slope!.upper - d.slope!.lower) / (2 * 1.959963984540054)).toBeCloseTo(seb, 5);

    const stored: { derived_from_run_id: string; derivation: { method: string } | null; clinical_status: string }[] =
      await dataSource.query(
        'SELECT derived_from_run_id, derivation, clinical_status FROM score_versions WHERE id = $1',
        [v.id],
      );
    expect(stored[0]).toMatchObject({ derived_from_run_id: runId, clinical_status: 'not approved' });
    expect(stored[0].derivation?.method).toBe('logistic');
  });

  it('evaluates the rules when the run worker completes a new run of the version', async () => {
    const rows = shiftMonths(kestrelRows(1500, 104, { logitShift: 1.0, months: 3 }), 9);
    const cohort = await createCohortFixture(rows, { label: 'P4' });
    const res = await request(app)
      .post('/api/runs')
      .set(bearer(await tokenFor('statistician')))
      .send({ scoreVersionId: score.scoreVersionId, cohortVersionId: cohort.cohortVersionId });
    expect(res.status).toBe(201);
    const runId: string = res.body.run.id;
    for (let k = 0; k < 20; k++) {
      const done: { status: string }[] = await dataSource.query('SELECT status FROM validation_runs WHERE id = $1', [
        runId,
      ]);
      if (done[0].status === 'completed') break;
      await processNextRun();
    }
    const alerts: { kind: string }[] = await dataSource.query(
      `SELECT ar.kind FROM drift_alerts a JOIN alert_rules ar ON ar.id = a.rule_id WHERE a.score_version_id = $1 AND a.period = 'P4' ORDER BY ar.kind`,
      [score.scoreVersionId],
    );
    expect(alerts.map((a) => a.kind)).toEqual(expect.arrayContaining(['citl-consecutive', 'oe-limit']));
  }, 60_000);

  it('refuses recalibration of a supplied-probability version clearly (409)', async () => {
    const supplied = await createScoreFixture({ mode: 'supplied', probabilityColumn: 'risk' });
    const rows = kestrelRows(400, 7).map((r) => ({
      ...r,
      predictors: { risk: Math.round(expit(lpOf(FIXTURE_MODEL, r)) * 1000) / 1000 },
    }));
    const cohort = await createCohortFixture(rows);
    const runId = await recordRunNow(
      null,
      supplied.scoreVersionId,
      cohort.cohortVersionId,
      runSettingsSchema.parse({}),
    );
    const res = await request(app)
      .post(`/api/runs/${runId}/recalibrate`)
      .set(bearer(await tokenFor('statistician')))
      .send({ method: 'intercept' });
    expect(res.status).toBe(409);
    expect(res.body.error).toMatch(/supplied probabilities/);
    expect(
      (
        await request(app)
          .post('/api/runs/00000000-0000-4000-8000-000000000000/recalibrate')
          .set(bearer(await tokenFor('statistician')))
          .send({ method: 'intercept' })
      ).status,
    ).toBe(404);
  });
});
