// Runs the outside reference tools (Debian's /usr/bin/python3 with scikit-learn/statsmodels, /usr/bin/Rscript with
// pROC, MASS and metafor) on data passed through temp CSV files. A missing tool skips locally but FAILS when CI=true.
import { execFileSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { mulberry32 } from '../../server/src/stats/bootstrap';

export const PYTHON = '/usr/bin/python3';
export const RSCRIPT = '/usr/bin/Rscript';

function works(cmd: string, args: string[]): boolean {
  try {
    execFileSync(cmd, args, { stdio: 'ignore', timeout: 60_000 });
    return true;
  } catch {
    return false;
  }
}

export const hasPython = works(PYTHON, ['-c', 'import sklearn, statsmodels, pandas']);
export const hasR = works(RSCRIPT, ['-e', 'library(pROC); library(MASS)']);
/** Skip only off CI: on CI a missing reference tool must fail the run. */
export const skipPython = !hasPython && process.env.CI !== 'true';
export const skipR = !hasR && process.env.CI !== 'true';
export const hasMetafor = works(RSCRIPT, ['-e', 'library(metafor)']);
export const skipMetafor = !hasMetafor && process.env.CI !== 'true';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-ref-'));
let fileNo = 0;

export function writeCsv(columns: Record<string, ArrayLike<number>>): string {
  const names = Object.keys(columns);
  const n = columns[names[0]].length;
  const lines = [names.join(',')];
  for (let i = 0; i < n; i++) lines.push(names.map((c) => String(columns[c][i])).join(','));
  const file = join(dir, `data-${++fileNo}.csv`);
  writeFileSync(file, lines.join('\n') + '\n');
  return file;
}

/** The JSON a reference script prints: each test reads the keys its own script wrote. */
// eslint-disable-next-line @typescript-eslint/no-explicit-any -- the shape is set by the R or Python text beside each test
type ScriptOutput = any;

export function runPython(script: string, ...args: string[]): ScriptOutput {
  return JSON.parse(execFileSync(PYTHON, ['-c', script, ...args], { encoding: 'utf8', maxBuffer: 1 << 28 }));
}

export function runR(script: string, ...args: string[]): ScriptOutput {
  const out = execFileSync(RSCRIPT, ['-e', script, ...args], {
    encoding: 'utf8',
    maxBuffer: 1 << 28,
    stdio: ['ignore', 'pipe', 'ignore'],
  });
  return JSON.parse(out.trim().split('\n').pop()!);
}

/** A seeded cohort: lp ~ N(μ, σ), p = expit(lp) rounded to `digits`, y ~ Bernoulli(expit(a + b·lp)). */
export function cohort(
  n: number,
  seed: number,
  opts: { mu?: number; sigma?: number; a?: number; b?: number; digits?: number } = {},
) {
  const { mu = -1.5, sigma = 1, a = 0.2, b = 0.8, digits = 12 } = opts;
  const r = mulberry32(seed);
  const p = new Float64Array(n);
  const y = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    const z = Math.sqrt(-2 * Math.log(1 - r())) * Math.cos(2 * Math.PI * r());
    const lp = mu + sigma * z;
    p[i] = Number((1 / (1 + Math.exp(-lp))).toFixed(digits));
    y[i] = r() < 1 / (1 + Math.exp(-(a + b * lp))) ? 1 : 0;
  }
  return { p, y };
}

export function relErr(a: number, b: number): number {
  return Math.abs(a - b) / Math.max(Math.abs(b), 1e-300);
}
