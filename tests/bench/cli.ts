// npm run bench:cli — the whole command-line process against the usual scripting stack, on the same seeded
// 1,000,000-row (outcome, risk) file: Plumbline's CLI (the built bundle, node dist/cli/plumbline.mjs, start-up
// included) and a Python script with pandas + scikit-learn + statsmodels (Debian's python3 packages, installed here if
// missing) computing AUC, log loss, Brier and the two calibration fits. Median of three alternating runs of each;
// the answers are compared so both did the same work. Last line: `ratio <cli seconds / peer seconds>` (target ≤ 0.5).
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { mulberry32 } from '../../server/src/stats/bootstrap';

const N = 1_000_000;
const RUNS = 3;
const PYTHON = '/usr/bin/python3';
const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-cli-'));
const file = join(dir, 'cohort.csv');
const peerScript = join(dir, 'peer.py');

const PEER = `
import json, sys
import numpy as np, pandas as pd
import statsmodels.api as sm
from sklearn.metrics import brier_score_loss, log_loss, roc_auc_score
d = pd.read_csv(sys.argv[1])
y = d["outcome"].to_numpy()
p = d["risk"].to_numpy()
pc = np.clip(p, 1e-15, 1 - 1e-15)
lp = np.log(pc / (1 - pc))
intercept = sm.GLM(y, np.ones((len(y), 1)), family=sm.families.Binomial(), offset=lp).fit().params[0]
slope = sm.GLM(y, sm.add_constant(lp), family=sm.families.Binomial()).fit().params[1]
print(json.dumps({"auc": roc_auc_score(y, p), "logLoss": log_loss(y, pc), "brier": brier_score_loss(y, p),
                  "calibrationIntercept": float(intercept), "calibrationSlope": float(slope)}))
`;

function generate(n: number, seed: number): string {
  const r = mulberry32(seed);
  const lines = ['outcome,risk'];
  for (let i = 0; i < n; i++) {
    const z = Math.sqrt(-2 * Math.log(1 - r())) * Math.cos(2 * Math.PI * r());
    const lp = -1.2 + 0.9 * z;
    const p = 1 / (1 + Math.exp(-lp));
    lines.push(`${r() < 1 / (1 + Math.exp(-(0.1 + 0.9 * lp))) ? 1 : 0},${p.toFixed(6)}`);
  }
  return lines.join('\n') + '\n';
}

/** Debian's pandas, scikit-learn and statsmodels, installed as docker-free-dev.sh installs them for the tests. */
function ensurePeer(): void {
  const ok = () => spawnSync(PYTHON, ['-c', 'import pandas, sklearn, statsmodels'], { stdio: 'ignore' }).status === 0;
  if (ok()) return;
  console.log('installing Debian python3-pandas python3-sklearn python3-statsmodels …');
  const root = process.getuid?.() === 0;
  const apt = (args: string[]) =>
    execFileSync(root ? 'apt-get' : 'sudo', root ? args : ['apt-get', ...args], {
      stdio: 'inherit',
      env: { ...process.env, DEBIAN_FRONTEND: 'noninteractive' },
    });
  apt(['update', '-qq']);
  apt(['install', '-y', '-qq', 'python3-pandas', 'python3-sklearn', 'python3-statsmodels']);
  if (!ok()) throw new Error(`${PYTHON} still cannot import pandas, sklearn and statsmodels`);
}

function timed(cmd: string, args: string[]): { seconds: number; stdout: string } {
  const t = performance.now();
  const r = spawnSync(cmd, args, { encoding: 'utf8', maxBuffer: 64 * 1024 * 1024 });
  const seconds = (performance.now() - t) / 1000;
  if (r.status !== 0) throw new Error(`${cmd} ${args.join(' ')} failed: ${r.stderr}`);
  return { seconds, stdout: r.stdout };
}
const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];
const s = (x: number) => `${x.toFixed(2)} s`;

try {
  ensurePeer();
  writeFileSync(file, generate(N, 2027));
  writeFileSync(peerScript, PEER);
  // The CLI as shipped: bundled once by esbuild (npm run build:cli), then run by node; the build is not timed.
  execFileSync('npm', ['run', '-s', 'build:cli'], { stdio: 'inherit' });
  const cliArgs = ['dist/cli/plumbline.mjs', 'validate', '--csv', file, '--outcome', 'outcome', '--prediction', 'risk'];
  console.log(`cohort: ${N.toLocaleString('en')} rows (outcome, risk; seed 2027), ${file}`);

  const cli: number[] = [];
  const peer: number[] = [];
  let cliOut = '',
    peerOut = '';
  for (let i = 0; i < RUNS; i++) {
    const a = timed(process.execPath, cliArgs);
    cli.push(a.seconds);
    cliOut = a.stdout;
    const b = timed(PYTHON, [peerScript, file]);
    peer.push(b.seconds);
    peerOut = b.stdout;
    console.log(`run ${i + 1}: cli ${s(a.seconds)}, peer ${s(b.seconds)}`);
  }

  // Both computed the same numbers (to the peer's own precision on a million rows).
  const ours = JSON.parse(cliOut);
  const theirs = JSON.parse(peerOut);
  const pairs: [string, number, number][] = [
    ['AUC', ours.auc.estimate, theirs.auc],
    ['log loss', ours.logLoss, theirs.logLoss],
    ['Brier', ours.brier, theirs.brier],
    ['calibration intercept', ours.calibrationIntercept.estimate, theirs.calibrationIntercept],
    ['calibration slope', ours.calibrationSlope.estimate, theirs.calibrationSlope],
  ];
  for (const [name, x, y] of pairs) {
    const agree = Math.abs(x - y) <= 1e-6 + 1e-6 * Math.abs(y);
    console.log(`${name.padEnd(22)} cli ${x.toFixed(6)}  peer ${y.toFixed(6)}${agree ? '' : '  DIFFERS'}`);
    if (!agree) process.exitCode = 1;
  }

  // For information: the same command under tsx, which transpiles at start-up (npm run cli builds first instead).
  const tsx = timed(process.execPath, ['--import', 'tsx', 'server/src/cli/main.ts', ...cliArgs.slice(1)]);
  console.log(`for information, under tsx without the build: ${s(tsx.seconds)}`);
  console.log(`cli (node dist/cli/plumbline.mjs, whole process): median ${s(median(cli))} of ${cli.map(s).join(', ')}`);
  console.log(
    `peer (pandas + scikit-learn + statsmodels, whole process): median ${s(median(peer))} of ${peer.map(s).join(', ')}`,
  );
  console.log(`ratio ${(median(cli) / median(peer)).toFixed(3)}`);
} finally {
  rmSync(dir, { recursive: true, force: true });
}
