// Meta-analysis and heterogeneity against R 4.2 with metafor 3.8 (Debian's r-cran-metafor), run here on per-site data
// the test generates: R computes each site's figures itself (pROC DeLong, glm) and pools them with rma(); the engine
// does the same from the raw rows. metafor's own stopping rule is |Δτ²| < 1e-5 and glm's is a deviance change < 1e-8; the R side
// is run with 1e-12 and 1e-14 so both sides are converged well past the 1e-6 compared.
import { describe, expect, it } from 'vitest';
import { siteAnalysis, subgroupAnalysis, type PooledMetric } from '../../server/src/stats/groupPerformance';
import { heterogeneityTest, randomEffectsReml } from '../../server/src/stats/metaAnalysis';
import { tQuantile } from '../../server/src/stats/studentT';
import { cohort, runR, skipMetafor, skipR, writeCsv } from './tools';

const json =
  'toJ <- function(x) cat(paste0("{", paste0("\\"", names(x), "\\":", sapply(x, function(v) if (length(v) == 1) format(v, digits = 17) else paste0("[", paste(format(v, digits = 17), collapse = ","), "]")), collapse = ","), "}\\n"))';
const CTRL = 'control = list(threshold = 1e-12, maxiter = 10000)';

/** Rows from several invented sites, each with its own miscalibration (a, b) and case mix (mu). */
function sites(spec: { n: number; a: number; b: number; mu: number }[], seed: number) {
  const p: number[] = [];
  const y: number[] = [];
  const site: string[] = [];
  const siteNo: number[] = [];
  spec.forEach((s, k) => {
    const c = cohort(s.n, seed + k, { a: s.a, b: s.b, mu: s.mu, digits: 10 });
    for (let i = 0; i < s.n; i++) {
      p.push(c.p[i]);
      y.push(c.y[i]);
      site.push(`site ${String.fromCharCode(65 + k)}`);
      siteNo.push(k + 1);
    }
  });
  return { p: Float64Array.from(p), y: Uint8Array.from(y), site, siteNo };
}

// R: per site, pROC AUC and DeLong variance, glm calibration fits, log O/E; then rma(REML) per metric.
const R_SITES = `suppressMessages({library(pROC); library(metafor)}); ${json}
d <- read.csv(commandArgs(TRUE)[1]); out <- list()
per <- do.call(rbind, lapply(split(d, d$site), function(s) {
  r <- roc(s$y, s$p, levels = c(0, 1), direction = "<", quiet = TRUE); a <- as.numeric(auc(r)); va <- var(r, method = "delong")
  lp <- qlogis(s$p); ci <- summary(glm(s$y ~ offset(lp), family = binomial, control = glm.control(epsilon = 1e-14, maxit = 100)))$coefficients; sl <- summary(glm(s$y ~ lp, family = binomial, control = glm.control(epsilon = 1e-14, maxit = 100)))$coefficients
  phi <- mean(s$y)
  data.frame(logitAuc = qlogis(a), logitAuc_se = sqrt(va) / (a * (1 - a)), calibrationIntercept = ci[1, 1], calibrationIntercept_se = ci[1, 2],
    calibrationSlope = sl[2, 1], calibrationSlope_se = sl[2, 2], logOe = log(sum(s$y) / sum(s$p)), logOe_se = sqrt((1 - phi) / (nrow(s) * phi)))
}))
for (m in c("logitAuc", "calibrationIntercept", "calibrationSlope", "logOe")) {
  f <- rma(yi = per[[m]], sei = per[[paste0(m, "_se")]], method = "REML", ${CTRL}); pr <- predict(f); k <- f$k
  t <- qt(0.975, k - 2); pil <- as.numeric(f$b) - t * sqrt(f$tau2 + f$se^2); piu <- as.numeric(f$b) + t * sqrt(f$tau2 + f$se^2)
  out[paste0(m, c("_y", "_tau2", "_b", "_se", "_lb", "_ub", "_QE", "_QEp", "_I2", "_piNormLb", "_piNormUb", "_piLb", "_piUb"))] <-
    list(per[[m]], f$tau2, as.numeric(f$b), f$se, f$ci.lb, f$ci.ub, f$QE, f$QEp, f$I2, pr$pi.lb, pr$pi.ub, pil, piu)
}
toJ(out)`;

describe.skipIf(skipMetafor)('metafor rma(method = "REML") on per-site figures', () => {
  it.each([
    [
      1,
      [
        { n: 900, a: 0.3, b: 0.8, mu: -1.5 },
        { n: 700, a: -0.2, b: 1.1, mu: -1.2 },
        { n: 1200, a: 0.6, b: 0.7, mu: -1.8 },
        { n: 500, a: 0, b: 1, mu: -1 },
        { n: 800, a: 0.1, b: 0.6, mu: -1.4 },
        { n: 1000, a: -0.4, b: 0.9, mu: -1.6 },
      ],
    ],
    [
      2,
      [
        { n: 600, a: 0.2, b: 0.8, mu: -1.3 },
        { n: 650, a: 0.2, b: 0.8, mu: -1.3 },
        { n: 700, a: 0.2, b: 0.8, mu: -1.3 },
      ],
    ],
  ])(
    'scenario %i: per-site values, τ², pooled estimate, SE, CI, Q, I² and both prediction intervals to 1e-6',
    (scenario, spec) => {
      const d = sites(spec, 300 + 10 * scenario);
      const ref = runR(R_SITES, writeCsv({ p: d.p, y: d.y, site: d.siteNo }));
      const a = siteAnalysis(d.p, d.y, d.site);
      const close = (got: number, want: number, what: string) => expect(Math.abs(got - want), what).toBeLessThan(1e-6);
      for (const m of ['logitAuc', 'calibrationIntercept', 'calibrationSlope', 'logOe'] as PooledMetric[]) {
        const r = a.pooled[m].result!;
        expect(a.pooled[m].levels).toHaveLength(spec.length);
        const want = (k: string) => ref[`${m}_${k}`];
        const ys = Array.isArray(want('y')) ? want('y') : [want('y')];
        ys.forEach((v: number, i: number) => close(randomEffectsInputs(a, m)[i], v, `${m} site ${i}`)); // R pROC / glm per site [ref]
        close(r.tau2, want('tau2'), `${m} tau2`); // metafor rma REML tau2 [ref]
        close(r.estimate, want('b'), `${m} estimate`); // metafor rma REML b [ref]
        close(r.se, want('se'), `${m} se`); // metafor rma REML se [ref]
        close(r.lower, want('lb'), `${m} ci.lb`); // metafor rma ci.lb [ref]
        close(r.upper, want('ub'), `${m} ci.ub`); // metafor rma ci.ub [ref]
        close(r.q, want('QE'), `${m} Q`); // metafor rma QE [ref]
        close(r.qPValue, want('QEp'), `${m} Q p`); // metafor rma QEp [ref]
        close(r.i2, want('I2'), `${m} I2`); // metafor rma I2 (percent) [ref]
        close(r.predictionIntervalNormal.lower, want('piNormLb'), `${m} pi.lb`); // metafor predict() pi.lb (normal) [ref]
        close(r.predictionIntervalNormal.upper, want('piNormUb'), `${m} pi.ub`); // metafor predict() pi.ub (normal) [ref]
        close(r.predictionInterval.lower, want('piLb'), `${m} Riley PI lower`); // Riley, Higgins & Deeks 2011: b − qt(.975, k−2)·√(τ²+SE²), R [ref]
        close(r.predictionInterval.upper, want('piUb'), `${m} Riley PI upper`); // ibid. [ref]
      }
    },
  );

  it('τ² on the boundary (0) and a large τ², on invented estimates', () => {
    for (const [y, se] of [
      [
        [0.1, 0.11, 0.09, 0.105],
        [0.2, 0.25, 0.3, 0.22],
      ],
      [
        [-1.2, 0.4, 1.9, 0.3, -0.5, 2.4, 0.0],
        [0.1, 0.15, 0.3, 0.05, 0.2, 0.4, 0.12],
      ],
    ]) {
      const ref = runR(
        `suppressMessages(library(metafor)); ${json}; a <- commandArgs(TRUE); f <- rma(yi = as.numeric(strsplit(a[1], ",")[[1]]), sei = as.numeric(strsplit(a[2], ",")[[1]]), method = "REML", ${CTRL}); toJ(list(tau2 = f$tau2, b = as.numeric(f$b), se = f$se, I2 = f$I2))`,
        y.join(','),
        se.join(','),
      );
      const r = randomEffectsReml(y, se);
      expect(Math.abs(r.tau2 - ref.tau2)).toBeLessThan(1e-6); // metafor rma REML tau2 [ref]
      expect(Math.abs(r.estimate - ref.b)).toBeLessThan(1e-6); // metafor rma REML b [ref]
      expect(Math.abs(r.se - ref.se)).toBeLessThan(1e-6); // metafor rma REML se [ref]
      expect(Math.abs(r.i2 - ref.I2)).toBeLessThan(1e-6); // metafor rma I2 [ref]
    }
  });
});

function randomEffectsInputs(a: ReturnType<typeof siteAnalysis>, m: PooledMetric): number[] {
  return a.levels.map((l) => {
    if (m === 'logitAuc') return Math.log(l.auc!.estimate / (1 - l.auc!.estimate));
    if (m === 'logOe') return Math.log(l.oe!.estimate);
    return l[m]!.estimate;
  });
}

describe.skipIf(skipMetafor)('Cochran\'s Q across subgroup levels against metafor rma(method = "FE")', () => {
  it('calibration-in-the-large and log O/E across four subgroups', () => {
    const d = sites(
      [
        { n: 800, a: 0.3, b: 1, mu: -1.5 },
        { n: 600, a: -0.1, b: 1, mu: -1.2 },
        { n: 900, a: 0.5, b: 1, mu: -1.7 },
        { n: 400, a: 0, b: 1, mu: -1 },
      ],
      400,
    );
    const a = subgroupAnalysis(d.p, d.y, d.site);
    for (const m of ['calibrationIntercept', 'logOe'] as const) {
      const inputs = a.levels.map((l) =>
        m === 'logOe'
          ? { y: Math.log(l.oe!.estimate), se: l.oe!.seLog }
          : { y: l.calibrationIntercept!.estimate, se: l.calibrationIntercept!.se },
      );
      const ref = runR(
        `suppressMessages(library(metafor)); ${json}; a <- commandArgs(TRUE); f <- rma(yi = as.numeric(strsplit(a[1], ",")[[1]]), sei = as.numeric(strsplit(a[2], ",")[[1]]), method = "FE"); toJ(list(QE = f$QE, QEp = f$QEp, b = as.numeric(f$b), se = f$se))`,
        inputs.map((i) => i.y.toPrecision(17)).join(','),
        inputs.map((i) => i.se.toPrecision(17)).join(','),
      );
      const h = a.heterogeneity[m].result!;
      expect(h.df).toBe(3);
      expect(Math.abs(h.q - ref.QE)).toBeLessThan(1e-9); // metafor rma(method = "FE") QE [ref]
      expect(Math.abs(h.pValue - ref.QEp)).toBeLessThan(1e-9); // metafor rma(method = "FE") QEp [ref]
      expect(Math.abs(h.pooled - ref.b)).toBeLessThan(1e-12); // metafor rma(method = "FE") b [ref]
      expect(Math.abs(h.pooledSe - ref.se)).toBeLessThan(1e-12); // metafor rma(method = "FE") se [ref]
      expect(
        heterogeneityTest(
          inputs.map((i) => i.y),
          inputs.map((i) => i.se),
        ).q,
      ).toBe(h.q);
    }
  });
});

describe.skipIf(skipR)('the t quantile behind the prediction interval', () => {
  it('tQuantile(0.975, df) is within 1e-12 relative of R qt for df 1 to 60', () => {
    const ref = runR(`${json}; toJ(list(q = qt(0.975, 1:60)))`).q as number[];
    ref.forEach((q, i) => expect(Math.abs(tQuantile(0.975, i + 1) - q) / q, `df ${i + 1}`).toBeLessThan(1e-12)); // R stats::qt [ref]
  });
});
