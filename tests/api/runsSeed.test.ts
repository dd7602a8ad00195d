// The demo runs seed: Kestrel v2 on each demo quarter, completed with hashes that the API's reproduce confirms.
import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { DEMO_COHORT_NAME, KESTREL_SCORE_NAME, seedCohorts } from '../../server/src/demo/seeds/cohorts';
import { seedRuns } from '../../server/src/demo/seeds/runs';
import { seedKestrelScore } from '../../server/src/demo/seeds/scenario';
import { app, bearer, dataSource, tokenFor, useDatabase } from '../helpers/api';

useDatabase();

const demoRuns = async () =>
  (await dataSource.query(
    `SELECT r.id, r.status, r.results_sha256, r.cohort_version_id FROM validation_runs r
       JOIN score_versions sv ON sv.id = r.score_version_id JOIN scores s ON s.id = sv.score_id
       JOIN cohort_versions cv ON cv.id = r.cohort_version_id JOIN cohorts c ON c.id = cv.cohort_id
       WHERE s.name = $1 AND sv.version = 2 AND c.name = $2 ORDER BY r.created_at, r.id`,
    [KESTREL_SCORE_NAME, DEMO_COHORT_NAME],
  )) as { id: string; status: string; results_sha256: string; cohort_version_id: string }[];

describe('seedRuns', () => {
  it('stores one completed run per demo quarter, once, reproducible through the API', async () => {
    await seedKestrelScore();
    await seedCohorts();
    await seedRuns();
    const first = (await demoRuns()).filter((r) => r.status === 'completed');
    // One completed run per quarter (a run started by hand on a quarter may add more, never fewer).
    expect(new Set(first.map((r) => r.cohort_version_id)).size).toBe(8);
    expect(first.every((r) => /^[0-9a-f]{64}$/.test(r.results_sha256))).toBe(true);
    await seedRuns();
    expect(await demoRuns()).toHaveLength(first.length);
    const res = await request(app)
      .post(`/api/runs/${first[0].id}/reproduce`)
      .set(bearer(await tokenFor('statistician')));
    expect(res.status).toBe(200);
    expect(res.body.match).toBe(true);
    const run = await request(app)
      .get(`/api/runs/${first[0].id}`)
      .set(bearer(await tokenFor('chair')));
    expect(run.body.run.results.periods).toHaveLength(3); // monthly periods of one quarter
    expect(run.body.run.settings.subgroupColumns).toEqual(['sex', 'age_band', 'unit', 'site']);
  });
});
