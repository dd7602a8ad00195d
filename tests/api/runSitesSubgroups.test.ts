// A run with a site column, subgroup columns and bootstrap replicates stores the full subgroup (fairness) analysis,
// the per-site figures with their random-effects pooling, and the calibration band — each equal to the engine's pure
// functions on the same rows. Fixture data is invented (tests/helpers/fixtures.ts): three sites, one of them
// under-predicted.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RunDetail, RunResults } from '@shared/runs';
import { stopBackgroundServices } from '../../server/src/jobs/background';
import { asStored, engineSettings } from '../../server/src/domain/runs/runCompute';
import { processNextRun } from '../../server/src/domain/runs/runQueue';
import { calibrationBand } from '../../server/src/stats/bootstrap';
import { siteAnalysis, subgroupAnalysis } from '../../server/src/stats/groupPerformance';
import { applyModel, resolveSettings, validate } from '../../server/src/stats/index';
import { app, bearer, completedRun, tokenFor, useDatabase } from '../helpers/api';
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
const SITES = ['Harbour', 'Hillside', 'Riverside'];

const startRun = (settings: Record<string, unknown>) =>
  completedRun(score.scoreVersionId, cohort.cohortVersionId, settings);

beforeAll(async () => {
  while (await processNextRun());
  score = await createScoreFixture();
  cohort = await createCohortFixture(
    kestrelRows(1800, 31).map((r, i) => ({ ...r, subgroups: { ...r.subgroups, site: SITES[i % 3] } })),
  );
});

afterAll(async () => {
  await stopBackgroundServices();
});

describe('a run with subgroups, a site column and bootstrap replicates', () => {
  let run: RunDetail;
  let p: Float64Array;
  let y: Uint8Array;

  beforeAll(async () => {
    run = await startRun({ subgroupColumns: ['sex'], siteColumn: 'site', bootstrapReplicates: 30, bootstrapSeed: 17 });
    const rows = cohort.rows;
    const columns: Record<string, string[]> = {};
    for (const pred of FIXTURE_MODEL.predictors)
      columns[pred.column] = rows.map((x) => String(x.predictors[pred.column]));
    const applied = applyModel(FIXTURE_MODEL, columns, rows.length);
    if (!applied.ok) throw new Error(applied.message);
    p = applied.p;
    y = Uint8Array.from(rows.map((x) => x.outcome));
  });

  it('completes and keeps the site column in its settings', () => {
    expect(run.error).toBeNull();
    expect(run.status).toBe('completed');
    expect(run.settings.siteColumn).toBe('site');
  });

  it('stores the subgroup analysis the engine computes on the same rows', () => {
    const r = run.results as RunResults;
    const s = resolveSettings(engineSettings(run.settings));
    const direct = subgroupAnalysis(
      p,
      y,
      cohort.rows.map((x) => x.subgroups!.sex),
      s,
    );
    expect(r.subgroupAnalyses).toHaveLength(1);
    expect(r.subgroupAnalyses![0]).toEqual(asStored({ column: 'sex', ...direct }));
    expect(r.subgroupAnalyses![0].levels.map((l) => l.level)).toEqual(['female', 'male']);
    expect(r.subgroupAnalyses![0].heterogeneity.logOe.result!.df).toBe(1);
    // ICI has a bootstrap interval in each level because the run asked for replicates
    for (const l of r.subgroupAnalyses![0].levels) expect(l.ici!.lower).toBeLessThan(l.ici!.upper);
  });

  it('stores the per-site figures and the random-effects pooling', () => {
    const r = run.results as RunResults;
    const s = resolveSettings(engineSettings(run.settings));
    const direct = siteAnalysis(
      p,
      y,
      cohort.rows.map((x) => x.subgroups!.site),
      s,
    );
    expect(r.sites).toEqual(asStored({ column: 'site', ...direct }));
    expect(r.sites!.levels.map((l) => l.level)).toEqual(SITES);
    const auc = r.sites!.pooled.logitAuc.result!;
    expect(auc.k).toBe(3);
    expect(auc.predictionInterval.df).toBe(1);
  });

  it('stores the calibration band and the standardised net benefit intervals', () => {
    const r = run.results as RunResults;
    const s = resolveSettings(engineSettings(run.settings));
    expect(r.calibrationBand).toEqual(
      asStored(calibrationBand(p, y, validate(p, y, engineSettings(run.settings, false)).calibrationCurve.smoothed, s)),
    );
    expect(r.overall.bootstrap!.intervals['standardizedNetBenefit@0.1'].lower).toBeLessThan(
      r.overall.bootstrap!.intervals['standardizedNetBenefit@0.1'].upper,
    );
  });

  it('reproduces to the same results hash', async () => {
    const res = await request(app)
      .post(`/api/runs/${run.id}/reproduce`)
      .set(bearer(await tokenFor('statistician')));
    expect(res.status, JSON.stringify(res.body)).toBe(200);
    expect(res.body.match).toBe(true);
  });
});

describe('site column problems', () => {
  it('a run naming a site column the cohort lacks is refused with a message that names it', async () => {
    const res = await request(app)
      .post('/api/runs')
      .set(bearer(await tokenFor('statistician')))
      .send({
        scoreVersionId: score.scoreVersionId,
        cohortVersionId: cohort.cohortVersionId,
        settings: { siteColumn: 'centre' },
      });
    expect(res.status).toBe(400);
    expect(JSON.stringify(res.body)).toContain('no site column');
    expect(JSON.stringify(res.body)).toContain('centre');
  });

  it('settings refuse an empty site column name', async () => {
    const res = await request(app)
      .post('/api/runs')
      .set(bearer(await tokenFor('statistician')))
      .send({
        scoreVersionId: score.scoreVersionId,
        cohortVersionId: cohort.cohortVersionId,
        settings: { siteColumn: '' },
      });
    expect(res.status).toBe(400);
  });
});
