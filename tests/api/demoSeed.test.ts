// The demo is seeded once, into an empty database (server/src/demo/seed.ts): running the seed again — every dev start
// does — files no review, signature or approval, even when a newer demo run is waiting and the demo password changed.
import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { runSettingsSchema } from '@shared/runs';
import type { RunResults, RunSettings } from '@shared/runs';
import { seedDemo } from '../../server/src/demo/seed';
import { DEMO_COHORT_NAME, KESTREL_SCORE_NAME } from '../../server/src/demo/seeds/cohorts';
import { DEMO_SITE_RUN_QUARTER, DEMO_SITE_RUN_SETTINGS, seedSiteRun } from '../../server/src/demo/seeds/siteRun';
import { WREN_SCORE } from '../../server/src/demo/seeds/competingScore';
import { GAPS_COHORT_NAME, GAPS_COLUMNS, GAPS_QUARTER } from '../../server/src/demo/seeds/gapsCohort';
import { loadCohortData } from '../../server/src/domain/cohorts/cohortData';
import { recordRunNow } from '../../server/src/domain/runs/runQueue';
import { app, bearer, dataSource, DEMO_PASSWORD, loginAs, ownerDataSource, useDatabase } from '../helpers/api';

useDatabase();

const governanceCounts = async () =>
  (
    await dataSource.query(
      `SELECT (SELECT count(*)::int FROM run_reviews) AS reviews, (SELECT count(*)::int FROM signatures) AS signatures,
              (SELECT count(*)::int FROM audit_log WHERE source_ip = 'seed') AS seeded_acts, (SELECT count(*)::int FROM users) AS users`,
    )
  )[0];

describe('the demo seed', () => {
  it('was made once, with its governance acts on the record as seeded', async () => {
    const [marker] = await dataSource.query(`SELECT count(*)::int AS n FROM audit_log WHERE action = 'demo.seeded'`);
    expect(marker.n).toBe(1);
    const acts: { action: string }[] = await dataSource.query(
      `SELECT action FROM audit_log WHERE source_ip = 'seed' AND action IN ('review.create', 'signature.approve') ORDER BY seq`,
    );
    expect(acts.map((a) => a.action)).toEqual(['review.create', 'signature.approve', 'review.create']);
  });

  it('has a completed run by site with bootstrap replicates, whose sites, curves by group and band are stored', async () => {
    const runs: { id: string; label: string; settings: RunSettings; results: RunResults }[] = await dataSource.query(
      `SELECT r.id, cv.label, r.settings, r.results FROM validation_runs r
         JOIN score_versions sv ON sv.id = r.score_version_id JOIN scores s ON s.id = sv.score_id
         JOIN cohort_versions cv ON cv.id = r.cohort_version_id JOIN cohorts c ON c.id = cv.cohort_id
       WHERE s.name = $1 AND c.name = $2 AND cv.label = $3 AND r.status = 'completed' AND r.settings->>'siteColumn' IS NOT NULL`,
      [KESTREL_SCORE_NAME, DEMO_COHORT_NAME, DEMO_SITE_RUN_QUARTER],
    );
    expect(runs).toHaveLength(1);
    const [run] = runs;
    expect(run.settings).toEqual(DEMO_SITE_RUN_SETTINGS);
    expect(run.settings.bootstrapReplicates).toBeGreaterThan(0);
    const r = run.results;
    // Two invented sites, both with figures, pooled.
    expect(r.sites!.column).toBe('site');
    expect(r.sites!.levels.map((l) => l.level)).toEqual(['Main campus', 'North annex']);
    expect(r.sites!.levels.every((l) => l.error === null && l.calibrationCurve!.p.length > 10)).toBe(true);
    expect(r.sites!.pooled.logitAuc.result!.k).toBe(2);
    // A curve for every level of every subgroup column, and the bootstrap's intervals and band.
    expect(r.subgroupAnalyses!.map((a) => a.column)).toEqual(DEMO_SITE_RUN_SETTINGS.subgroupColumns);
    for (const a of r.subgroupAnalyses!) expect(a.levels.every((l) => l.calibrationCurve!.p.length > 10)).toBe(true);
    expect(r.overall.bootstrap!.replicates).toBe(DEMO_SITE_RUN_SETTINGS.bootstrapReplicates);
    for (const key of ['brier', 'scaledBrier', 'ici', 'e50', 'e90', 'emax', 'netBenefit@0.1'])
      expect(r.overall.bootstrap!.intervals[key].lower).toBeLessThan(r.overall.bootstrap!.intervals[key].upper);
    expect(r.calibrationBand!.replicates).toBe(DEMO_SITE_RUN_SETTINGS.bootstrapReplicates);
    expect(r.calibrationBand!.p).toEqual(r.overall.calibrationCurve.smoothed.p);
    // Seeding that part again adds nothing.
    await seedSiteRun();
    const [{ n }] = await dataSource.query(
      `SELECT count(*)::int AS n FROM validation_runs WHERE settings->>'siteColumn' IS NOT NULL AND cohort_version_id = (SELECT cohort_version_id FROM validation_runs WHERE id = $1)`,
      [run.id],
    );
    expect(n).toBe(1);
  });

  it("has the Kestrel–Wren comparison, computed through its job, and the newest quarter's review names it", async () => {
    const rows: { id: string; status: string; results_sha256: string | null }[] = await dataSource.query(
      `SELECT sc.id, sc.status, sc.results_sha256 FROM score_comparisons sc
         JOIN score_versions sv ON sv.id = sc.second_score_version_id JOIN scores s ON s.id = sv.score_id
       WHERE s.name = $1 AND EXISTS (SELECT 1 FROM audit_log a WHERE a.target_id = sc.id::text
         AND a.action = 'comparison.created' AND a.source_ip = 'seed')`,
      [WREN_SCORE.name],
    );
    expect(rows).toHaveLength(1);
    const [c] = rows;
    expect(c.status).toBe('completed');
    expect(c.results_sha256).toMatch(/^[0-9a-f]{64}$/);
    const audit: { action: string }[] = await dataSource.query(
      `SELECT action FROM audit_log WHERE target_id = $1 ORDER BY seq`,
      [c.id],
    );
    expect(audit.map((a) => a.action)).toEqual(['comparison.created', 'comparison.completed']);
    // Its job ran in the seed's process and left nothing waiting.
    const [jobs] = await dataSource.query(
      `SELECT count(*) FILTER (WHERE state < 'completed')::int AS waiting, count(*)::int AS n
       FROM pgboss.job WHERE name = 'comparison' AND data->>'comparisonId' = $1`,
      [c.id],
    );
    expect(jobs.waiting).toBe(0);
    const [named] = await dataSource.query(
      `SELECT count(*)::int AS n FROM run_reviews WHERE comparison_id = $1 AND superseded_by IS NULL`,
      [c.id],
    );
    expect(named.n).toBe(1);
  });

  it('a second seed changes nothing, even with a newer unreviewed demo run and a changed chair password', async () => {
    const chairToken = await loginAs('chair@demo.test');
    const changed = `changed-by-the-chair-${Date.now()}`;
    expect(
      (
        await request(app)
          .post('/api/auth/password')
          .set(bearer(chairToken))
          .send({ currentPassword: DEMO_PASSWORD, newPassword: changed })
      ).status,
    ).toBe(200);
    const [{ head }] = await dataSource.query('SELECT max(seq)::text AS head FROM audit_log');
    let extraRun = '';
    try {
      // A newer run of the demo score on the newest demo quarter: the old seed reviewed (and signed) whatever was newest.
      const [newest] = await dataSource.query(
        `SELECT r.score_version_id, r.cohort_version_id FROM validation_runs r JOIN score_versions sv ON sv.id = r.score_version_id
         JOIN scores s ON s.id = sv.score_id JOIN cohort_versions cv ON cv.id = r.cohort_version_id
         WHERE r.status = 'completed' AND s.name ILIKE 'Kestrel%' ORDER BY cv.period_end DESC NULLS LAST, r.created_at DESC LIMIT 1`,
      );
      extraRun = await recordRunNow(
        null,
        newest.score_version_id,
        newest.cohort_version_id,
        runSettingsSchema.parse({ timeGrouping: 'month' }),
        { test: 'demo seed once' },
      );
      const before = await governanceCounts();
      await expect(seedDemo()).resolves.toBe('already has data');
      expect(await governanceCounts()).toEqual(before);
    } finally {
      // As the owner, take the extra run and its two audit entries (the newest) away again, so later files see the demo as seeded.
      await (
        await ownerDataSource()
      ).transaction(async (m) => {
        await m.query('SET LOCAL session_replication_role = replica');
        await m.query('DELETE FROM audit_checkpoints WHERE seq > $1', [head]);
        await m.query('DELETE FROM audit_log WHERE seq > $1', [head]);
        if (extraRun) await m.query('DELETE FROM validation_runs WHERE id = $1', [extraRun]);
      });
      const token = await loginAs('chair@demo.test', changed);
      await request(app)
        .post('/api/auth/password')
        .set(bearer(token))
        .send({ currentPassword: changed, newPassword: DEMO_PASSWORD });
    }
    expect(
      (
        await request(app)
          .get('/api/audit/verify')
          .set(bearer(await loginAs('admin@demo.test')))
      ).body.ok,
    ).toBe(true);
  });

  it('has a completed run on the cohort with gaps that pools multiple imputation beside the complete cases', async () => {
    const [r] = await dataSource.query(
      `SELECT r.status, r.settings, r.results FROM validation_runs r JOIN cohort_versions cv ON cv.id = r.cohort_version_id
       JOIN cohorts c ON c.id = cv.cohort_id WHERE c.name = $1 AND r.settings->'missingData'->>'method' = 'multiple-imputation'`,
      [GAPS_COHORT_NAME],
    );
    expect(r?.status).toBe('completed');
    const md = r.results.missingData;
    expect(md.rowsWithGaps).toBeGreaterThan(0);
    expect(md.completeCase.leftOut).toBe(md.rowsWithGaps);
    expect(md.imputed.imputations).toBe(r.settings.missingData.imputations);
    expect(md.imputed.metrics.map((m: { key: string }) => m.key)).toEqual(
      expect.arrayContaining(['auc', 'oe', 'calibrationSlope']),
    );
  });

  it('has a cohort whose Charlson index and prior admissions have gaps that depend on what else was recorded', async () => {
    const [v] = await dataSource.query(
      `SELECT cv.id, cv.row_count, cv.excluded_count, cv.mapping, cv.missingness FROM cohort_versions cv JOIN cohorts c ON c.id = cv.cohort_id WHERE c.name = $1`,
      [GAPS_COHORT_NAME],
    );
    expect(v).toBeDefined();
    expect(v.mapping.predictorsWithGaps).toEqual(GAPS_COLUMNS);
    expect(v.row_count).toBe(GAPS_QUARTER.n);
    expect(v.excluded_count).toBe(0);
    const data = await loadCohortData(v.id);
    const gap = (c: string) => (i: number) => data.columns[c][i] === null;
    const rate = (miss: (i: number) => boolean, where: (i: number) => boolean) => {
      let n = 0;
      let m = 0;
      for (let i = 0; i < data.n; i++)
        if (where(i)) {
          n++;
          if (miss(i)) m++;
        }
      return m / n;
    };
    const charlson = gap('charlson_index');
    const emergencyShort = (i: number) =>
      data.columns.emergency_admission[i] === 'yes' && Number(data.columns.length_of_stay[i]) <= 3;
    // Missing at random: more often after a short emergency stay, less often among the readmitted.
    expect(rate(charlson, emergencyShort)).toBeGreaterThan(2 * rate(charlson, (i) => !emergencyShort(i)));
    expect(rate(charlson, (i) => data.outcome[i] === 1)).toBeLessThan(rate(charlson, (i) => data.outcome[i] === 0));
    const prior = gap('prior_admissions');
    const annex = (i: number) => data.subgroups.site[i] === 'North annex';
    expect(rate(prior, annex)).toBeGreaterThan(4 * rate(prior, (i) => !annex(i)));
    // The stored summary counts the same gaps the rows hold.
    let both = 0;
    for (let i = 0; i < data.n; i++) if (charlson(i) && prior(i)) both++;
    const byColumn = Object.fromEntries(
      v.missingness.byColumn.map((c: { column: string; missing: number }) => [c.column, c.missing]),
    );
    expect(byColumn.charlson_index).toBe(data.columns.charlson_index.filter((x) => x === null).length);
    expect(byColumn.prior_admissions).toBe(data.columns.prior_admissions.filter((x) => x === null).length);
    expect(v.missingness.patterns.find((p: { missing: string[] }) => p.missing.length === 2)?.rows).toBe(both);
    expect(both).toBeGreaterThan(0);
  });
});
