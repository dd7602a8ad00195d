// A run on a cohort version with gaps in the score's predictors: complete cases by default, and with multiple
// imputation the pooled analysis beside them; the imputation settings are part of the inputs and their hash, the same
// seed gives the same result bit for bit, and reproduce matches. The stored per-imputation estimates are pooled again
// by R's mice::pool.scalar, and the completed data sets the run used are exported and analysed in R from scratch.
// Fixture data is invented (tests/helpers/gapsFixture.ts: gaps missing at random on the outcome and on age).
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RunDetail, RunResults } from '@shared/runs';
import type { MissingDataResult } from '@shared/missingData';
import { stopBackgroundServices } from '../../server/src/jobs/background';
import { processNextRun } from '../../server/src/domain/runs/runQueue';
import { loadRunInput } from '../../server/src/domain/runs/runInput';
import { completedDataSets, predictorGaps } from '../../server/src/domain/runs/runMissingData';
import { app, bearer, completedRun, tokenFor, useDatabase } from '../helpers/api';
import { createScoreFixture, FIXTURE_MODEL, type ScoreFixture } from '../helpers/fixtures';
import { createCohortWithGaps, kestrelRowsWithGaps, type GapRow } from '../helpers/gapsFixture';
import { relErr, RSCRIPT, runR, writeCsv } from '../reference/tools';
import { execFileSync } from 'node:child_process';

useDatabase();

let score: ScoreFixture;
let cohort: { cohortVersionId: string; gapRows: GapRow[] };

const startRun = (settings: Record<string, unknown>) =>
  completedRun(score.scoreVersionId, cohort.cohortVersionId, settings);

const MI = {
  method: 'multiple-imputation',
  imputations: 5,
  iterations: 3,
  seed: 4242,
  extraColumns: ['sex', 'period'],
};

beforeAll(async () => {
  while (await processNextRun());
  score = await createScoreFixture();
  cohort = await createCohortWithGaps(kestrelRowsWithGaps(1500, 77));
});

afterAll(async () => {
  await stopBackgroundServices();
});

const complete = (rows: GapRow[]) => rows.filter((r) => Object.values(r.predictors).every((v) => v !== null));

describe('a run on a cohort with gaps', () => {
  let cc: RunDetail;
  let mi: RunDetail;
  let again: RunDetail;

  beforeAll(async () => {
    cc = await startRun({});
    mi = await startRun({ missingData: MI });
    again = await startRun({ missingData: MI });
  });

  it('offers multiple imputation for the cohort version: its mapping names the predictors with gaps', async () => {
    const res = await request(app)
      .get('/api/runs/options')
      .set(bearer(await tokenFor('statistician')));
    const cv = res.body.cohortVersions.find((v: { id: string }) => v.id === cohort.cohortVersionId);
    expect([...cv.predictorsWithGaps].sort()).toEqual(['charlson_index', 'emergency_admission', 'length_of_stay']);
  });

  it('by default analyses complete cases and says how many patients were left out and how they differ', () => {
    expect(cc.status, cc.error ?? '').toBe('completed');
    const r = cc.results as RunResults;
    const kept = complete(cohort.gapRows);
    expect(r.overall.n).toBe(kept.length);
    expect(r.overall.events).toBe(kept.filter((x) => x.outcome === 1).length);
    const md = r.missingData as MissingDataResult;
    expect(md.method).toBe('complete-case');
    expect(md.imputed).toBeNull();
    expect(md.completeCase.leftOut).toBe(cohort.gapRows.length - kept.length);
    const out = cohort.gapRows.filter((x) => !kept.includes(x));
    expect(md.completeCase.eventRateLeftOut).toBeCloseTo(out.filter((x) => x.outcome).length / out.length, 12);
    // the gaps depend on the outcome: the patients left out have far more events than those kept
    expect(md.completeCase.eventRateLeftOut!).toBeGreaterThan(2 * md.completeCase.eventRateKept!);
    const age = md.completeCase.comparison.find((c) => c.column === 'age')!;
    const mean = (xs: number[]) => xs.reduce((s, v) => s + v, 0) / xs.length;
    expect(age.leftOut.mean).toBeCloseTo(mean(out.map((x) => Number(x.predictors.age))), 10);
    expect(age.kept.mean).toBeCloseTo(mean(kept.map((x) => Number(x.predictors.age))), 10);
    expect(md.shareIncomplete).toBeGreaterThan(0.05);
    expect(md.warnings.join(' ')).toMatch(/have a gap in a predictor/);
  });

  it('with multiple imputation stores both analyses side by side', () => {
    expect(mi.status, mi.error ?? '').toBe('completed');
    const r = mi.results as RunResults;
    expect(r.overall.engineVersion).toBe('1.2.0');
    expect(r.overall.n).toBe(complete(cohort.gapRows).length);
    const md = r.missingData as MissingDataResult;
    expect(md.method).toBe('multiple-imputation');
    const imp = md.imputed!;
    expect(imp.imputations).toBe(5);
    expect(imp.iterations).toBe(3);
    expect(imp.seed).toBe(4242);
    expect(imp.extraColumns).toEqual(['sex', 'period']);
    expect(imp.n).toBe(cohort.gapRows.length);
    expect(imp.metrics.map((m) => m.key)).toEqual(['auc', 'calibrationIntercept', 'calibrationSlope', 'oe']);
    for (const m of imp.metrics) {
      expect(m.perImputation.estimate).toHaveLength(5);
      expect(m.between).toBeGreaterThan(0);
      expect(m.total).toBeCloseTo(m.within + (1 + 1 / 5) * m.between, 14);
      expect(m.fmi).toBeGreaterThan(0);
      expect(m.fmi).toBeLessThan(1);
      expect(m.lower).toBeLessThan(m.estimate);
      expect(m.upper).toBeGreaterThan(m.estimate);
      expect(m.completeCase).not.toBeNull();
    }
    // the AUC beside it is the run's own complete-case AUC
    expect(imp.metrics[0].completeCase!.estimate).toBe(r.overall.auc.estimate);
    expect(imp.rocCurve.fpr).toHaveLength(101);
    expect(imp.rocCurve.tpr[0]).toBeGreaterThanOrEqual(0);
    expect(imp.rocCurve.tpr[100]).toBe(1);
    expect(imp.calibrationCurve.p).toHaveLength(50);
    expect(imp.curvePooling).toMatch(/averaged over the imputations on a common grid/);
    expect(imp.diagnostics.map((d) => d.column).sort()).toEqual([
      'charlson_index',
      'emergency_admission',
      'length_of_stay',
    ]);
    const em = imp.diagnostics.find((d) => d.column === 'emergency_admission')!;
    expect(em.imputedBy).toBe('logistic regression');
    expect(em.bins.map((b) => b.label)).toEqual(['no', 'yes']);
    expect(em.bins.reduce((s, b) => s + b.imputed, 0)).toBeCloseTo(1, 12);
    expect(imp.diagnostics.find((d) => d.column === 'length_of_stay')!.imputedBy).toBe('predictive mean matching');
  });

  it('the same seed gives the same result and hash; the imputation settings are part of the inputs', async () => {
    expect(again.status).toBe('completed');
    expect(again.resultsSha256).toBe(mi.resultsSha256);
    expect(again.inputsSha256).toBe(mi.inputsSha256);
    expect(again.results).toEqual(mi.results);
    expect(mi.inputsSha256).not.toBe(cc.inputsSha256);
    const six = await startRun({ missingData: { ...MI, imputations: 6 } });
    expect(six.status).toBe('completed');
    expect(six.inputsSha256).not.toBe(mi.inputsSha256);
    expect(six.resultsSha256).not.toBe(mi.resultsSha256);
    expect(six.results!.missingData!.imputed!.metrics[0].perImputation.estimate.slice(0, 5)).toEqual(
      mi.results!.missingData!.imputed!.metrics[0].perImputation.estimate,
    ); // chain l is a pure function of (data, settings, l): a sixth chain leaves the first five as they were
    const seeded = await startRun({ missingData: { ...MI, seed: 4243 } });
    expect(seeded.inputsSha256).not.toBe(mi.inputsSha256);
    expect(seeded.resultsSha256).not.toBe(mi.resultsSha256);
  });

  it('reproduces bit for bit', async () => {
    const res = await request(app)
      .post(`/api/runs/${mi.id}/reproduce`)
      .set(bearer(await tokenFor('statistician')));
    expect(res.status, JSON.stringify(res.body)).toBe(200);
    expect(res.body.match, JSON.stringify(res.body.differences)).toBe(true);
    expect(res.body.recomputedSha256).toBe(mi.resultsSha256);
  });
});

describe('a multiple-imputation run on a supplied-probability score', () => {
  it('fails with a message: there are no predictors to impute', async () => {
    const supplied = await createScoreFixture({ mode: 'supplied', probabilityColumn: 'age' });
    const res = await request(app)
      .post('/api/runs')
      .set(bearer(await tokenFor('statistician')))
      .send({
        scoreVersionId: supplied.scoreVersionId,
        cohortVersionId: cohort.cohortVersionId,
        settings: { missingData: MI },
      });
    expect(res.status).toBe(201);
    while (await processNextRun());
    const got = await request(app)
      .get(`/api/runs/${res.body.run.id}`)
      .set(bearer(await tokenFor('statistician')));
    expect(got.body.run.status).toBe('failed');
    expect(got.body.run.error).toMatch(/multiple imputation needs a score with a formula/);
  });
});

function hasMice(): boolean {
  try {
    execFileSync(RSCRIPT, ['-e', 'library(mice); library(pROC)'], { stdio: 'ignore', timeout: 60_000 });
    return true;
  } catch {
    return false;
  }
}
/** As tests/reference/tools.ts: skip only off CI; on CI a missing r-cran-mice must fail the run. */
const skipMice = !hasMice() && process.env.CI !== 'true';

const json =
  'toJ <- function(x) cat(paste0("{", paste0("\\"", names(x), "\\":", sapply(x, function(v) if (length(v) == 1) format(v, digits = 17) else paste0("[", paste(format(v, digits = 17), collapse = ","), "]")), collapse = ","), "}\\n"))';

describe.skipIf(skipMice)("a stored run's pooling against R's mice", () => {
  let run: RunDetail;
  beforeAll(async () => {
    run = await startRun({ missingData: { ...MI, imputations: 6, seed: 99 } });
    expect(run.status, run.error ?? '').toBe('completed');
  });

  it('the stored per-imputation estimates pooled by mice::pool.scalar give the stored estimate, total variance and df', () => {
    for (const m of run.results!.missingData!.imputed!.metrics) {
      const ref = runR(
        `suppressMessages(library(mice)); ${json}; a <- commandArgs(TRUE); q <- as.numeric(strsplit(a[1], ",")[[1]]); u <- as.numeric(strsplit(a[2], ",")[[1]])
p <- pool.scalar(q, u, n = Inf, rule = "rubin1987"); toJ(list(qbar = p$qbar, t = p$t, b = p$b, ubar = p$ubar, df = p$df, fmi = p$fmi))`,
        m.perImputation.estimate.map((v) => v.toPrecision(17)).join(','),
        m.perImputation.variance.map((v) => v.toPrecision(17)).join(','),
      );
      expect(relErr(m.pooledOnScale, ref.qbar), m.key).toBeLessThan(1e-8); // mice::pool.scalar qbar [ref]
      expect(relErr(m.total, ref.t), m.key).toBeLessThan(1e-8); // mice::pool.scalar t [ref]
      expect(relErr(m.between, ref.b), m.key).toBeLessThan(1e-8); // mice::pool.scalar b [ref]
      expect(relErr(m.within, ref.ubar), m.key).toBeLessThan(1e-8); // mice::pool.scalar ubar [ref]
      expect(relErr(m.df, ref.df), m.key).toBeLessThan(1e-8); // mice::pool.scalar df [ref]
      expect(relErr(m.fmi, ref.fmi), m.key).toBeLessThan(1e-8); // mice::pool.scalar fmi [ref]
    }
  });

  it("the run's completed data sets, exported and analysed in R (pROC, glm) then pooled by mice::pool, give the stored figures", async () => {
    const { input } = await loadRunInput({
      scoreVersionId: score.scoreVersionId,
      cohortVersionId: cohort.cohortVersionId,
      settings: run.settings,
    });
    const gaps = predictorGaps(input.score, input.data)!;
    // the same generator the run used, so these are the run's completed data sets
    const cols: Record<string, number[]> = { imp: [], y: [], p: [] };
    for (const set of completedDataSets({ ...input, gaps })) {
      const values = Object.fromEntries(set.columns.map((c, j) => [c.name, set.completed[j]]));
      const levelOf = (name: string, v: number) =>
        set.columns.find((c) => c.name === name)!.levelNames?.[v] ?? String(v);
      for (let i = 0; i < input.data.n; i++) {
        let lp = FIXTURE_MODEL.intercept;
        for (const p of FIXTURE_MODEL.predictors) {
          const v = values[p.column][i];
          const x =
            p.transform === 'indicator'
              ? levelOf(p.column, v) === p.level
                ? 1
                : 0
              : p.transform === 'log'
                ? Math.log(v)
                : v;
          lp += p.coefficient * x;
        }
        cols.imp.push(set.imputation + 1);
        cols.y.push(input.data.outcome[i]);
        cols.p.push(1 / (1 + Math.exp(-lp))); // the predicted risk as the engine computes it (ties included)
      }
    }
    const file = writeCsv({ imp: cols.imp, y: cols.y, p: cols.p });
    const ref = runR(
      `suppressMessages({library(mice); library(pROC)}); ${json}; d <- read.csv(commandArgs(TRUE)[1]); m <- max(d$imp)
ctl <- glm.control(epsilon = 1e-14, maxit = 100)
per <- sapply(1:m, function(l) { c <- d[d$imp == l, ]; p <- c$p; c$lp <- qlogis(p)
  r <- roc(c$y, p, levels = c(0, 1), direction = "<", quiet = TRUE); auc <- as.numeric(auc(r)); se <- sqrt(var(r, method = "delong"))
  s <- summary(glm(c$y ~ c$lp, family = binomial, control = ctl))$coefficients; i <- summary(glm(c$y ~ 1 + offset(c$lp), family = binomial, control = ctl))$coefficients
  phi <- mean(c$y); c(qlogis(auc), (se / (auc * (1 - auc)))^2, i[1, 1], i[1, 2]^2, s[2, 1], s[2, 2]^2, log(sum(c$y) / sum(p)), (1 - phi) / (length(p) * phi)) })
pl <- function(j) { p <- pool.scalar(per[j, ], per[j + 1, ], n = Inf); c(p$qbar, p$t, p$df) }
toJ(list(auc = pl(1), int = pl(3), slope = pl(5), oe = pl(7)))`,
      file,
    );
    const stored = Object.fromEntries(run.results!.missingData!.imputed!.metrics.map((m) => [m.key, m]));
    // The logistic fits stop at the engine's own convergence tolerance, so their standard errors (hence the total
    // variance and the df) agree with glm's to about 1e-7; AUC and O/E are closed forms and agree to 1e-8.
    const check = (key: string, r: number[], varianceTolerance: number) => {
      const m = stored[key];
      expect(relErr(m.pooledOnScale, r[0]), key).toBeLessThan(1e-8); // R (pROC DeLong / glm / log O/E) per set, mice::pool.scalar qbar [ref]
      expect(relErr(m.total, r[1]), key).toBeLessThan(varianceTolerance); // ibid., mice::pool.scalar t [ref]
      expect(relErr(m.df, r[2]), key).toBeLessThan(varianceTolerance); // ibid., mice::pool.scalar df [ref]
    };
    check('auc', ref.auc, 1e-8);
    check('calibrationIntercept', ref.int, 1e-6);
    check('calibrationSlope', ref.slope, 1e-6);
    check('oe', ref.oe, 1e-8);
  });
});
