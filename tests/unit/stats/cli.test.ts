// The command line as a person runs it: a child process on a small generated CSV.
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-cli-'));
const rows = ['risk,died,age'];
for (let i = 0; i < 200; i++) rows.push(`${((i % 19) + 1) / 20},${(i * 37) % 100 < ((i % 19) + 1) * 5 ? 1 : 0},${40 + (i % 50)}`);
const good = join(dir, 'cohort.csv');
writeFileSync(good, rows.join('\n') + '\n');
const bad = join(dir, 'bad.csv');
writeFileSync(bad, ['risk,died', '0.2,0', '0.3,1', '0.4,yes'].join('\n') + '\n');
const cli = (args: string[]) => spawnSync('npx', ['tsx', 'server/src/cli/main.ts', ...args], { encoding: 'utf8' });

describe('plumbline validate', () => {
  it('prints exactly the documented JSON keys', () => {
    const out = JSON.parse(execFileSync('npx', ['tsx', 'server/src/cli/main.ts', 'validate', '--csv', good, '--outcome', 'died', '--prediction', 'risk', '--thresholds', '0.1,0.3'], { encoding: 'utf8' }));
    expect(Object.keys(out)).toEqual(['n', 'events', 'auc', 'logLoss', 'logLossTotal', 'brier', 'scaledBrier', 'calibrationIntercept', 'calibrationSlope', 'oe', 'hosmerLemeshow', 'spiegelhalter', 'ici', 'e50', 'e90', 'emax', 'netBenefit', 'thresholds', 'warnings']);
    expect(out.n).toBe(200);
    expect(Object.keys(out.auc)).toEqual(['estimate', 'lower', 'upper', 'se']);
    expect(Object.keys(out.hosmerLemeshow)).toEqual(['statistic', 'df', 'pValue', 'groups']);
    expect(out.netBenefit.map((r: { threshold: number }) => r.threshold)).toEqual([0.1, 0.3]);
    expect(Object.keys(out.thresholds[0])).toEqual(['threshold', 'sensitivity', 'specificity', 'ppv', 'npv', 'tp', 'fp', 'tn', 'fn']);
    expect(Object.keys(out.thresholds[0].sensitivity)).toEqual(['estimate', 'lower', 'upper']);
  });
  it('applies a --model file and prints a table', () => {
    const model = join(dir, 'model.json');
    writeFileSync(model, JSON.stringify({ intercept: -3, predictors: [{ column: 'age', coefficient: 0.04 }] }));
    const r = cli(['validate', '--csv', good, '--outcome', 'died', '--model', model, '--format', 'table']);
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/AUC \(95% CI, DeLong\)/);
  });
  it('fails with one line naming file, line and column on a bad outcome', () => {
    const r = cli(['validate', '--csv', bad, '--outcome', 'died', '--prediction', 'risk']);
    expect(r.status).not.toBe(0);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stderr).toContain(`${bad} line 4, column died: outcome must be 0 or 1`);
  });
  it('fails on a missing column', () => {
    const r = cli(['validate', '--csv', good, '--outcome', 'dead', '--prediction', 'risk']);
    expect(r.status).toBe(1);
    expect(r.stderr).toMatch(/line 1, column dead: no such column/);
  });
});
