// Multiple imputation against R's mice 3.15 (Debian's r-cran-mice, with pROC 1.18 for the per-set AUC), run here.
//  (a) Rubin's rules: pool.scalar on the same numbers, to ~1e-12 relative (mice's rule "rubin1987"; n = Inf gives
//      Rubin's 1987 df, finite n the Barnard–Rubin 1999 df); the t quantile against R's qt.
//  (b) The imputation cannot match mice draw for draw (different random streams), so it is compared statistically:
//      the same data imputed by Plumbline and by mice(method = "pmm"), m = 50 each, and the same metrics pooled the
//      same way. Tolerance: each pooled estimate carries Monte Carlo error with variance B/m (B the between-imputation
//      variance, Rubin 1987 §3.1), and the two runs are independent, so they must agree within 4·√(B₁/m + B₂/m)
//      (a wrong algorithm — no parameter draw, no outcome in the model — shifts them by far more on these data).
// Data: a simulated cohort (seeded below) with predictor gaps missing at random on the outcome and on the other
// predictor; and mice's own `nhanes` (25 rows; shipped in r-cran-mice: age, bmi, hyp, chl with 9, 8 and 10 gaps).
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { mulberry32 } from '../../server/src/stats/bootstrap';
import { multipleImputation } from '../../server/src/stats/chainedImputation';
import { validateWithGaps } from '../../server/src/stats/pooledValidation';
import { normalDraw } from '../../server/src/stats/randomDraws';
import { poolScalar } from '../../server/src/stats/rubinsRules';
import { tQuantile } from '../../server/src/stats/studentT';
import { relErr, RSCRIPT, runR, writeCsv } from './tools';

function works(): boolean {
  try {
    execFileSync(RSCRIPT, ['-e', 'library(mice); library(pROC)'], { stdio: 'ignore', timeout: 60_000 });
    return true;
  } catch {
    return false;
  }
}
/** As tools.ts does for R: skip only off CI; on CI a missing r-cran-mice must fail the run. */
const skipMice = !works() && process.env.CI !== 'true';

const json =
  'toJ <- function(x) cat(paste0("{", paste0("\\"", names(x), "\\":", sapply(x, function(v) if (length(v) == 1) format(v, digits = 17) else paste0("[", paste(format(v, digits = 17), collapse = ","), "]")), collapse = ","), "}\\n"))';

describe.skipIf(skipMice)("Rubin's rules against mice::pool.scalar", () => {
  const R_POOL = `suppressMessages(library(mice)); ${json}; a <- commandArgs(TRUE); q <- as.numeric(strsplit(a[1], ",")[[1]]); u <- as.numeric(strsplit(a[2], ",")[[1]]); n <- as.numeric(a[3]); k <- as.numeric(a[4])
p <- pool.scalar(q, u, n = n, k = k, rule = "rubin1987"); toJ(list(qbar = p$qbar, ubar = p$ubar, b = p$b, t = p$t, df = p$df, r = p$r, fmi = p$fmi, lambda = (1 + 1/p$m) * p$b / p$t, lo = p$qbar - qt(0.975, p$df) * sqrt(p$t), hi = p$qbar + qt(0.975, p$df) * sqrt(p$t)))`;

  it.each([
    [5, 1, Infinity, 1],
    [20, 2, Infinity, 1],
    [20, 3, 120, 3], // Barnard–Rubin: complete-data df 117
    [50, 4, 30, 2], // small sample: complete-data df 28
    [3, 5, Infinity, 1],
  ])('m = %i (seed %i), n = %s, k = %i', (m, seed, n, k) => {
    const r = mulberry32(seed);
    const q = Array.from({ length: m }, () => 0.8 + 0.05 * normalDraw(r));
    const u = Array.from({ length: m }, () => 0.001 + 0.002 * r());
    const ref = runR(
      R_POOL,
      q.map((v) => v.toPrecision(17)).join(','),
      u.map((v) => v.toPrecision(17)).join(','),
      n === Infinity ? 'Inf' : String(n),
      String(k),
    );
    const p = poolScalar(q, u, n - k);
    expect(relErr(p.qbar, ref.qbar)).toBeLessThan(1e-12); // mice::pool.scalar qbar [ref]
    expect(relErr(p.within, ref.ubar)).toBeLessThan(1e-12); // mice::pool.scalar ubar [ref]
    expect(relErr(p.between, ref.b)).toBeLessThan(1e-12); // mice::pool.scalar b [ref]
    expect(relErr(p.total, ref.t)).toBeLessThan(1e-12); // mice::pool.scalar t [ref]
    expect(relErr(p.riv, ref.r)).toBeLessThan(1e-12); // mice::pool.scalar r [ref]
    expect(relErr(p.lambda, ref.lambda)).toBeLessThan(1e-12); // mice's λ = (1 + 1/m)b/t, as in mice::pool [ref]
    expect(relErr(p.df, ref.df)).toBeLessThan(1e-12); // mice:::barnard.rubin via pool.scalar [ref]
    expect(relErr(p.fmi, ref.fmi)).toBeLessThan(1e-12); // mice::pool.scalar fmi [ref]
    expect(relErr(p.lower, ref.lo)).toBeLessThan(1e-12); // qbar − qt(0.975, df)·√t in R [ref]
    expect(relErr(p.upper, ref.hi)).toBeLessThan(1e-12); // qbar + qt(0.975, df)·√t in R [ref]
  });

  it('no between-imputation variance: λ floored at 1e-4 in the df, as mice does', () => {
    const ref = runR(R_POOL, '1,1,1,1', '0.5,0.5,0.5,0.5', 'Inf', '1');
    const p = poolScalar([1, 1, 1, 1], [0.5, 0.5, 0.5, 0.5]);
    expect(relErr(p.df, ref.df)).toBeLessThan(1e-12); // mice::pool.scalar df = 3/1e-8 [ref]
    expect(relErr(p.fmi, ref.fmi)).toBeLessThan(1e-12); // mice::pool.scalar fmi [ref]
  });

  it('Student t quantiles against R qt', () => {
    const dfs = [0.7, 1, 2, 2.5, 4, 9.3, 30, 117.5, 300, 1000, 3000, 9999, 1e5, 3e8];
    const ref = runR(
      `${json}; d <- as.numeric(strsplit(commandArgs(TRUE)[1], ",")[[1]]); toJ(list(q975 = qt(0.975, d), q90 = qt(0.9, d)))`,
      dfs.join(','),
    );
    dfs.forEach((df, i) => {
      expect(relErr(tQuantile(0.975, df), ref.q975[i])).toBeLessThan(1e-12); // R qt(0.975, df) [ref]
      expect(relErr(tQuantile(0.9, df), ref.q90[i])).toBeLessThan(1e-12); // R qt(0.9, df) [ref]
    });
  });
});

/** The simulated cohort: x1 ~ N(50, 10), x2 = 0.05(x1 − 50) + N(0, 1), y ~ Bernoulli(expit(−1.5 + 0.1(x1 − 50) + 0.5 x2)). */
function simulated(n: number, seed: number) {
  const r = mulberry32(seed);
  const x1 = new Float64Array(n),
    x2 = new Float64Array(n),
    y = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    x1[i] = Number((50 + 10 * normalDraw(r)).toFixed(6));
    x2[i] = Number((0.05 * (x1[i] - 50) + normalDraw(r)).toFixed(6));
    y[i] = r() < 1 / (1 + Math.exp(-(-1.5 + 0.1 * (x1[i] - 50) + 0.5 * x2[i]))) ? 1 : 0;
  }
  // MAR: x1 missing far more often for events; x2 missing more often when x1 is high
  const g1 = Float64Array.from(x1, (v, i) => (r() < (y[i] ? 0.6 : 0.05) ? NaN : v));
  const g2 = Float64Array.from(x2, (v, i) => (r() < (x1[i] > 55 ? 0.35 : 0.1) ? NaN : v));
  return { x1, x2, y, g1, g2 };
}

const mean = (a: ArrayLike<number>) => Array.from(a).reduce((s, v) => s + v, 0) / a.length;
const varOfMean = (a: ArrayLike<number>) => {
  const m = mean(a);
  return Array.from(a).reduce((s, v) => s + (v - m) ** 2, 0) / (a.length - 1) / a.length;
};

describe.skipIf(skipMice)(
  'imputation against mice(method = "pmm"), m = 50, on a simulated cohort (seed 2031, n = 3000)',
  () => {
    const M = 50;
    const model = {
      intercept: -1.5 - 0.1 * 50,
      predictors: [
        { column: 'x1', coefficient: 0.1, transform: 'linear' as const },
        { column: 'x2', coefficient: 0.5, transform: 'linear' as const },
      ],
    };
    const d = simulated(3000, 2031);
    const file = writeCsv({
      y: d.y,
      x1: Array.from(d.g1, (v) => (Number.isNaN(v) ? 'NA' : v)) as unknown as number[],
      x2: Array.from(d.g2, (v) => (Number.isNaN(v) ? 'NA' : v)) as unknown as number[],
    });
    // the score's metrics on each of mice's completed sets, computed the way Plumbline computes them, pooled by pool.scalar
    const ref = runR(
      `suppressMessages({library(mice); library(pROC)}); ${json}; d <- read.csv(commandArgs(TRUE)[1]); a <- as.numeric(commandArgs(TRUE)[2:4])
imp <- mice(d, m = ${M}, maxit = 5, method = "pmm", seed = 2032, printFlag = FALSE)
per <- sapply(1:${M}, function(l) { c <- complete(imp, l); lp <- a[1] + a[2] * c$x1 + a[3] * c$x2; p <- plogis(lp)
  r <- roc(c$y, p, levels = c(0, 1), direction = "<", quiet = TRUE); auc <- as.numeric(auc(r)); se <- sqrt(var(r, method = "delong"))
  s <- summary(glm(c$y ~ lp, family = binomial))$coefficients; i <- summary(glm(c$y ~ 1 + offset(lp), family = binomial))$coefficients
  phi <- mean(c$y); c(qlogis(auc), (se / (auc * (1 - auc)))^2, log(sum(c$y) / sum(p)), (1 - phi) / (length(p) * phi), s[2, 1], s[2, 2]^2, i[1, 1], i[1, 2]^2, mean(c$x1), var(c$x1) / nrow(c)) })
pl <- function(j) pool.scalar(per[j, ], per[j + 1, ])
toJ(list(auc = pl(1)$qbar, aucB = pl(1)$b, oe = pl(3)$qbar, oeB = pl(3)$b, slope = pl(5)$qbar, slopeB = pl(5)$b, int = pl(7)$qbar, intB = pl(7)$b, x1 = pl(9)$qbar, x1B = pl(9)$b))`,
      file,
      String(model.intercept),
      '0.1',
      '0.5',
    );
    const ours = validateWithGaps(
      model,
      d.y,
      [
        { name: 'x1', kind: 'numeric', values: d.g1 },
        { name: 'x2', kind: 'numeric', values: d.g2 },
      ],
      { imputations: M, iterations: 5, seed: 2033, donors: 5 },
    );
    const within = (a: number, aB: number, b: number, bB: number) => Math.abs(a - b) < 4 * Math.sqrt(aB / M + bB / M);

    it('pooled AUC (logit scale), log O/E, calibration slope and intercept agree with mice within Monte Carlo error', () => {
      const p = ours.imputed.pooled;
      expect(within(p.auc.qbar, p.auc.between, ref.auc, ref.aucB), `${p.auc.qbar} vs ${ref.auc}`).toBe(true); // mice pmm + pROC, pool.scalar [ref]
      expect(within(p.oe.qbar, p.oe.between, ref.oe, ref.oeB), `${p.oe.qbar} vs ${ref.oe}`).toBe(true); // mice pmm, pool.scalar of log O/E [ref]
      expect(
        within(p.calibrationSlope!.qbar, p.calibrationSlope!.between, ref.slope, ref.slopeB),
        `${p.calibrationSlope!.qbar} vs ${ref.slope}`,
      ).toBe(true); // mice pmm + glm, pool.scalar [ref]
      expect(
        within(p.calibrationIntercept!.qbar, p.calibrationIntercept!.between, ref.int, ref.intB),
        `${p.calibrationIntercept!.qbar} vs ${ref.int}`,
      ).toBe(true); // mice pmm + glm offset, pool.scalar [ref]
    });

    it('the pooled mean of x1 agrees with mice; both recover the full-data mean, which complete cases understate', () => {
      const sets = multipleImputation(
        {
          outcome: d.y,
          columns: [
            { name: 'x1', kind: 'numeric', values: d.g1 },
            { name: 'x2', kind: 'numeric', values: d.g2 },
          ],
        },
        { imputations: M, iterations: 5, seed: 2033, donors: 5 },
      );
      const pooled = poolScalar(
        sets.map((s) => mean(s[0])),
        sets.map((s) => varOfMean(s[0])),
      );
      expect(within(pooled.qbar, pooled.between, ref.x1, ref.x1B), `${pooled.qbar} vs ${ref.x1}`).toBe(true); // mice pmm pooled mean [ref]
      const truth = mean(d.x1);
      const cc = Array.from(d.g1).filter((v) => !Number.isNaN(v));
      expect(truth).toBeGreaterThan(pooled.lower); // full-data mean of the simulated x1 (seed 2031)
      expect(truth).toBeLessThan(pooled.upper); // ibid.
      expect(mean(cc)).toBeLessThan(truth - 4 * Math.sqrt(varOfMean(cc))); // events (higher x1) are missing more often, by design of the simulation
      expect(ref.x1).toBeGreaterThan(mean(cc) + 4 * Math.sqrt(varOfMean(cc))); // mice moves the same way [ref]
    });

    it('complete cases lose events and understate O/E; the pooled O/E holds the full-data O/E within its interval', () => {
      const fullP = Float64Array.from(d.x1, (v, i) => 1 / (1 + Math.exp(-(model.intercept + 0.1 * v + 0.5 * d.x2[i]))));
      const fullOe = mean(d.y) / mean(fullP);
      const cc = ours.completeCase.result!;
      expect(ours.completeCase.leftOut).toBeGreaterThan(300);
      expect(cc.oe.upper).toBeLessThan(fullOe); // full-data O/E of the simulated cohort (seed 2031)
      expect(fullOe).toBeGreaterThan(ours.imputed.pooled.oe.estimateLower); // ibid.
      expect(fullOe).toBeLessThan(ours.imputed.pooled.oe.estimateUpper); // ibid.
      expect(Math.exp(ref.oe)).toBeGreaterThan(cc.oe.upper); // mice's pooled O/E is above the complete-case interval too [ref]
    });
  },
);

describe.skipIf(skipMice)(
  "mice's nhanes (25 rows): binary outcome age ≥ 2; bmi and chl by PMM, hyp by logistic regression",
  () => {
    it('pooled means of bmi and chl and the share with hypertension agree with mice within Monte Carlo error (m = 100)', () => {
      const M = 100;
      const ref = runR(`suppressMessages(library(mice)); ${json}
d <- data.frame(y = as.integer(nhanes$age >= 2), bmi = nhanes$bmi, hyp = factor(nhanes$hyp - 1), chl = nhanes$chl)
imp <- mice(d, m = ${M}, maxit = 5, method = c("", "pmm", "logreg", "pmm"), seed = 11, printFlag = FALSE)
per <- sapply(1:${M}, function(l) { c <- complete(imp, l); h <- as.integer(as.character(c$hyp)); c(mean(c$bmi), var(c$bmi) / 25, mean(c$chl), var(c$chl) / 25, mean(h), var(h) / 25) })
pl <- function(j) pool.scalar(per[j, ], per[j + 1, ], n = 25)
toJ(list(y = d$y, bmi = ifelse(is.na(d$bmi), -1, d$bmi), hyp = ifelse(is.na(d$hyp), -1, as.integer(as.character(d$hyp))), chl = ifelse(is.na(d$chl), -1, d$chl), mb = pl(1)$qbar, bb = pl(1)$b, mc = pl(3)$qbar, bc = pl(3)$b, mh = pl(5)$qbar, bh = pl(5)$b))`);
      const gap = (v: number[]) => Float64Array.from(v, (x) => (x < 0 ? NaN : x));
      const y = Uint8Array.from(ref.y);
      expect(y.length).toBe(25); // mice's nhanes has 25 rows [ref]
      const sets = multipleImputation(
        {
          outcome: y,
          columns: [
            { name: 'bmi', kind: 'numeric', values: gap(ref.bmi) },
            { name: 'hyp', kind: 'binary', values: gap(ref.hyp) },
            { name: 'chl', kind: 'numeric', values: gap(ref.chl) },
          ],
        },
        { imputations: M, iterations: 5, seed: 12, donors: 5 },
      );
      const pooled = (j: number) =>
        poolScalar(
          sets.map((s) => mean(s[j])),
          sets.map((s) => varOfMean(s[j])),
          24,
        );
      const within = (p: ReturnType<typeof pooled>, q: number, b: number) =>
        Math.abs(p.qbar - q) < 4 * Math.sqrt(p.between / M + b / M);
      expect(within(pooled(0), ref.mb, ref.bb), `${pooled(0).qbar} vs ${ref.mb}`).toBe(true); // mice pmm, nhanes bmi [ref]
      expect(within(pooled(1), ref.mh, ref.bh), `${pooled(1).qbar} vs ${ref.mh}`).toBe(true); // mice logreg, nhanes hyp [ref]
      expect(within(pooled(2), ref.mc, ref.bc), `${pooled(2).qbar} vs ${ref.mc}`).toBe(true); // mice pmm, nhanes chl [ref]
    });
  },
);
