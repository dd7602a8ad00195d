// npm run bench:engine — the engine on a seeded 1,000,000-row cohort against scikit-learn/statsmodels on the same file,
// and a 200-replicate bootstrap of the full set on 100,000 rows across worker threads. Last line: `ratio <number>`.
import { execFileSync } from 'node:child_process';
import { mkdtempSync, writeFileSync, rmSync } from 'node:fs';
import { availableParallelism, tmpdir } from 'node:os';
import { join } from 'node:path';
import { mulberry32 } from '../../server/src/stats/bootstrap';
import { validate, resolveSettings } from '../../server/src/stats/index';
import { sortCohort } from '../../server/src/stats/sortedCohort';
import { delongAuc } from '../../server/src/stats/delongAuc';
import { logLoss } from '../../server/src/stats/logLoss';
import { brier } from '../../server/src/stats/brier';
import { clampedLogit } from '../../server/src/stats/checkInputs';
import { calibrationIntercept } from '../../server/src/stats/calibrationIntercept';
import { calibrationSlope } from '../../server/src/stats/calibrationSlope';
import { readCohortCsv } from '../../server/src/cli/readCohortCsv';
import { bootstrapInWorkers } from '../../server/src/jobs/threads/pool';

const N = 1_000_000;
const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-'));
const file = join(dir, 'cohort.csv');

function generate(n: number, seed: number) {
  const r = mulberry32(seed);
  const lines = ['risk,died'];
  for (let i = 0; i < n; i++) {
    const z = Math.sqrt(-2 * Math.log(1 - r())) * Math.cos(2 * Math.PI * r());
    const lp = -2 + 0.9 * z;
    const p = 1 / (1 + Math.exp(-lp));
    lines.push(`${p.toFixed(8)},${r() < 1 / (1 + Math.exp(-(0.15 + 0.85 * lp))) ? 1 : 0}`);
  }
  return lines.join('\n') + '\n';
}
const ms = (t: number) => `${t.toFixed(0)} ms`;

writeFileSync(file, generate(N, 2026));
let t = performance.now();
const { p, y } = await readCohortCsv(file, { outcome: 'died', prediction: 'risk' });
const parseMs = performance.now() - t;
console.log(`cohort: ${N.toLocaleString('en')} rows (seed 2026), ${file}`);
console.log(`CSV parse (streamed, papaparse; not in the times below): ${ms(parseMs)}`);

validate(p.subarray(0, 20000), y.subarray(0, 20000)); // warm the JIT on a slice
const full: number[] = [];
for (let i = 0; i < 3; i++) {
  t = performance.now();
  validate(p, y);
  full.push(performance.now() - t);
}
console.log(`engine, full metric set (no bootstrap): ${full.map(ms).join(', ')} — best ${ms(Math.min(...full))}`);

const subset = () => {
  const s = sortCohort(p, y);
  delongAuc(s);
  logLoss(p, y);
  brier(p, y);
  const lp = clampedLogit(p);
  calibrationIntercept(lp, y);
  calibrationSlope(lp, y);
};
const sub: number[] = [];
for (let i = 0; i < 3; i++) {
  t = performance.now();
  subset();
  sub.push(performance.now() - t);
}
const engineSub = Math.min(...sub);
console.log(`engine, shared subset (AUC+DeLong SE, log loss, Brier, two logistic fits): best ${ms(engineSub)}`);

const PY = `
import sys, time, json, numpy as np, pandas as pd, statsmodels.api as sm
from sklearn.metrics import roc_auc_score, log_loss, brier_score_loss
d = pd.read_csv(sys.argv[1]); p = d['risk'].to_numpy(); y = d['died'].to_numpy()
best = 1e9
for _ in range(2):
  t = time.perf_counter()
  roc_auc_score(y, p); log_loss(y, p); brier_score_loss(y, p)
  q = np.clip(p, 1e-15, 1 - 1e-15); lp = np.log(q / (1 - q))
  sm.GLM(y, np.ones((len(y), 1)), family=sm.families.Binomial(), offset=lp).fit()
  sm.GLM(y, sm.add_constant(lp), family=sm.families.Binomial()).fit()
  best = min(best, time.perf_counter() - t)
print(json.dumps({'seconds': best}))`;
t = performance.now();
const py = JSON.parse(execFileSync('/usr/bin/python3', ['-c', PY, file], { encoding: 'utf8' }));
const pyWall = performance.now() - t;
const refMs = py.seconds * 1000;
console.log(
  `reference (scikit-learn roc_auc_score/log_loss/brier_score_loss + statsmodels GLM ×2), computation only: best of 2 ${ms(refMs)}; wall incl. start-up and CSV read: ${ms(pyWall)}`,
);
console.log('  (the reference AUC has no DeLong SE; the engine subset includes it)');

const B = 100_000;
const bp = p.subarray(0, B);
const by = y.subarray(0, B);
const settings = resolveSettings({ bootstrapReplicates: 200, bootstrapSeed: 7 });
const point = validate(bp, by);
t = performance.now();
const boot = await bootstrapInWorkers(bp, by, settings, point, availableParallelism());
console.log(
  `bootstrap: 200 replicates of the full set on ${B.toLocaleString('en')} rows, ${boot.workers} worker threads (${availableParallelism()} cores): ${ms(performance.now() - t)}; AUC ${point.auc.estimate.toFixed(4)} (${boot.intervals.auc.lower.toFixed(4)}–${boot.intervals.auc.upper.toFixed(4)})`,
);

const mem = process.memoryUsage();
console.log(
  `peak memory (main thread process): maxRSS ${(process.resourceUsage().maxRSS / 1024).toFixed(0)} MB; now rss ${(mem.rss / 2 ** 20).toFixed(0)} MB, heap ${(mem.heapUsed / 2 ** 20).toFixed(0)} MB, array buffers ${(mem.arrayBuffers / 2 ** 20).toFixed(0)} MB`,
);
rmSync(dir, { recursive: true, force: true });
console.log(`full set target < 2000 ms: ${Math.min(...full) < 2000 ? 'met' : 'missed'}`);
console.log(`ratio ${(engineSub / refMs).toFixed(3)}`);
