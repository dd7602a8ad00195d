// npm run bench:mi — multiple imputation of a run on a seeded 100,000-patient cohort, 30 % of rows with one or more of
// three predictors missing, 20 imputations × 5 iterations: Plumbline's chained equations (the code a run uses, one
// thread as in a run) and the pooled metric set on every completed data set, against R's mice (pmm, pmm, logreg) and
// the same metrics in R (pROC AUC with DeLong variance, the two calibration glms, O/E, Brier, log loss, the loess
// calibration curve and ICI) pooled by mice::pool.scalar, in the same benchmark run. Last line `ratio <plumbline/R>`.
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { ScoreModel } from '@shared/model';
import { mulberry32 } from '../../server/src/stats/bootstrap';
import { defaultImputationSettings, imputeOnce, type ImputationColumn } from '../../server/src/stats/chainedImputation';
import { computeFullSet, resolveSettings } from '../../server/src/stats/fullSet';
import { poolResults, riskFromColumns } from '../../server/src/stats/pooledValidation';
import { normalDraw } from '../../server/src/stats/randomDraws';
import type { ValidationResult } from '@shared/validation';

const N = 100_000;
const M = 20;
const ITERATIONS = 5;
const SEED = 2027;

// An invented score on three predictors: a lab value, a length of stay (log), and an emergency admission flag.
const MODEL: ScoreModel = {
  intercept: -4.2,
  predictors: [
    { column: 'lab', coefficient: 0.035, transform: 'linear' },
    { column: 'stay', coefficient: 0.4, transform: 'log' },
    { column: 'emergency', coefficient: 0.55, transform: 'linear' },
  ],
};

function generate() {
  const r = mulberry32(SEED);
  const lab = new Float64Array(N);
  const stay = new Float64Array(N);
  const emergency = new Float64Array(N);
  const y = new Uint8Array(N);
  for (let i = 0; i < N; i++) {
    emergency[i] = r() < 0.55 ? 1 : 0;
    lab[i] = Math.round(60 + 15 * normalDraw(r) + 6 * emergency[i]);
    stay[i] = 1 + Math.floor(-Math.log(1 - r()) * (3 + 0.03 * (lab[i] - 60)));
    const lp = MODEL.intercept + 0.035 * lab[i] + 0.4 * Math.log(stay[i]) + 0.55 * emergency[i];
    y[i] = r() < 1 / (1 + Math.exp(-(0.2 + 0.9 * lp))) ? 1 : 0;
  }
  // 30 % of rows have a gap: the pattern (which of the three, at least one) drawn per row
  const gaps = [lab, stay, emergency].map((c) => Float64Array.from(c));
  let incomplete = 0;
  for (let i = 0; i < N; i++) {
    if (r() >= 0.3) continue;
    incomplete++;
    let pattern = 0;
    while (pattern === 0) pattern = Math.floor(r() * 8);
    for (let k = 0; k < 3; k++) if (pattern & (1 << k)) gaps[k][i] = NaN;
  }
  return { y, lab: gaps[0], stay: gaps[1], emergency: gaps[2], incomplete };
}

const ms = (t: number) => `${(t / 1000).toFixed(2)} s`;
const d = generate();
const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-mi-'));
const file = join(dir, 'cohort.csv');
const cell = (v: number) => (Number.isNaN(v) ? 'NA' : String(v));
const lines = ['y,lab,stay,emergency'];
for (let i = 0; i < N; i++) lines.push(`${d.y[i]},${cell(d.lab[i])},${cell(d.stay[i])},${cell(d.emergency[i])}`);
writeFileSync(file, lines.join('\n') + '\n');
console.log(
  `cohort: ${N.toLocaleString('en')} patients (seed ${SEED}), ${d.incomplete.toLocaleString('en')} (${((100 * d.incomplete) / N).toFixed(1)} %) with a gap in lab, stay or emergency; ${M} imputations × ${ITERATIONS} iterations`,
);

const columns: ImputationColumn[] = [
  { name: 'lab', kind: 'numeric', values: d.lab },
  { name: 'stay', kind: 'numeric', values: d.stay },
  { name: 'emergency', kind: 'binary', values: d.emergency },
];
const settings = { ...defaultImputationSettings, imputations: M, iterations: ITERATIONS, seed: SEED };
const engine = resolveSettings({ bootstrapReplicates: 0 });

const cpu = (c: NodeJS.CpuUsage) => (c.user + c.system) / 1e6;
const cpuStart = process.cpuUsage();
let t = performance.now();
const completed: Float64Array[][] = [];
for (let l = 0; l < M; l++) completed.push(imputeOnce({ outcome: d.y, columns }, settings, l));
const imputeMs = performance.now() - t;

t = performance.now();
const byName = Object.fromEntries(columns.map((c) => [c.name, c]));
const per: ValidationResult[] = completed.map((set) =>
  computeFullSet(
    riskFromColumns(MODEL, byName, Object.fromEntries(columns.map((c, j) => [c.name, set[j]]))),
    d.y,
    engine,
  ),
);
const pooled = poolResults(per);
const metricsMs = performance.now() - t;
const ours = imputeMs + metricsMs;
const ourCpu = cpu(process.cpuUsage(cpuStart));
console.log(
  `Plumbline: imputation ${ms(imputeMs)}; pooled metric set (full set on each of ${M} completed sets + Rubin's rules) ${ms(metricsMs)}; total ${ms(ours)} (CPU ${ourCpu.toFixed(1)} s)`,
);
console.log(
  `  pooled AUC ${pooled.pooled.auc.estimate.toFixed(4)} (fmi ${pooled.pooled.auc.fmi.toFixed(3)}), O/E ${pooled.pooled.oe.estimate.toFixed(3)}, slope ${pooled.pooled.calibrationSlope?.estimate.toFixed(3)}`,
);

const R = `suppressMessages({library(mice); library(pROC)}); d <- read.csv(commandArgs(TRUE)[1]); d$emergency <- factor(d$emergency)
t0 <- proc.time()[["elapsed"]]; c0 <- sum(proc.time()[c("user.self", "sys.self")])
imp <- mice(d, m = ${M}, maxit = ${ITERATIONS}, method = c("", "pmm", "pmm", "logreg"), seed = ${SEED}, printFlag = FALSE)
t1 <- proc.time()[["elapsed"]]
per <- sapply(1:${M}, function(l) { c <- complete(imp, l); lp <- ${MODEL.intercept} + 0.035 * c$lab + 0.4 * log(c$stay) + 0.55 * (c$emergency == "1"); p <- plogis(lp)
  r <- roc(c$y, p, levels = c(0, 1), direction = "<", quiet = TRUE); auc <- as.numeric(auc(r)); se <- sqrt(var(r, method = "delong"))
  s <- summary(glm(c$y ~ lp, family = binomial))$coefficients; i <- summary(glm(c$y ~ 1 + offset(lp), family = binomial))$coefficients
  phi <- mean(c$y); brier <- mean((p - c$y)^2); ll <- -mean(c$y * log(p) + (1 - c$y) * log(1 - p))
  fit <- loess(c$y ~ p, span = 0.75, degree = 2); ici <- mean(abs(fitted(fit) - p))
  c(qlogis(auc), (se / (auc * (1 - auc)))^2, log(sum(c$y) / sum(p)), (1 - phi) / (length(p) * phi), s[2, 1], s[2, 2]^2, i[1, 1], i[1, 2]^2, brier, ll, ici) })
pl <- lapply(c(1, 3, 5, 7), function(j) pool.scalar(per[j, ], per[j + 1, ]))
t2 <- proc.time()[["elapsed"]]; c2 <- sum(proc.time()[c("user.self", "sys.self")])
cat(sprintf('{"impute": %.3f, "metrics": %.3f, "cpu": %.3f, "auc": %.6f, "oe": %.6f, "slope": %.6f}\\n', t1 - t0, t2 - t1, c2 - c0, plogis(pl[[1]]$qbar), exp(pl[[2]]$qbar), pl[[3]]$qbar))`;
const r = JSON.parse(
  execFileSync('/usr/bin/Rscript', ['-e', R, file], { encoding: 'utf8', maxBuffer: 1 << 26 })
    .trim()
    .split('\n')
    .pop()!,
);
const theirs = (r.impute + r.metrics) * 1000;
console.log(
  `R mice 3.15 + metric code in R: imputation ${ms(r.impute * 1000)}; pooled metric set (pROC, glm ×2, O/E, Brier, log loss, loess ICI on each set + pool.scalar) ${ms(r.metrics * 1000)}; total ${ms(theirs)} (CPU ${r.cpu.toFixed(1)} s)`,
);
console.log(
  `  pooled AUC ${r.auc.toFixed(4)}, O/E ${r.oe.toFixed(3)}, slope ${r.slope.toFixed(3)} (different random draws: close, not equal)`,
);
rmSync(dir, { recursive: true, force: true });
console.log(
  `CPU ratio ${(ourCpu / r.cpu).toFixed(3)} (less sensitive to other work on the machine than the wall-clock ratio below)`,
);
console.log(`ratio ${(ours / theirs).toFixed(3)}`);
