// The command line as a person runs it: a child process on a small generated CSV.
import { execFileSync, spawnSync } from 'node:child_process';
import { chmodSync, mkdtempSync, writeFileSync } from 'node:fs';
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

describe('plumbline validate: one-line errors and cautions', () => {
  const oneLine = (r: ReturnType<typeof cli>) => {
    expect(r.status, r.stderr).toBe(1);
    expect(r.stderr.trim().split('\n'), r.stderr).toHaveLength(1);
    expect(r.stderr).not.toMatch(/\bat .*\.(ts|js):\d+/); // no stack trace
    return r.stderr;
  };
  const file = (name: string, text: string) => { const f = join(dir, name); writeFileSync(f, text); return f; };

  it('a missing file and a folder', () => {
    expect(oneLine(cli(['validate', '--csv', join(dir, 'nope.csv'), '--outcome', 'died', '--prediction', 'risk']))).toMatch(/nope\.csv: file not found/);
    expect(oneLine(cli(['validate', '--csv', dir, '--outcome', 'died', '--prediction', 'risk']))).toMatch(/is a folder, not a CSV file/);
  });
  // root reads any file whatever its mode, so this can only be shown as another user.
  it.skipIf(process.getuid?.() === 0)('an unreadable file', () => {
    const f = file('locked.csv', 'risk,died\n0.2,0\n');
    chmodSync(f, 0o000);
    expect(oneLine(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']))).toMatch(/cannot be read \(permission denied\)/);
  });
  it('a duplicated column name', () => {
    const f = file('dup.csv', 'died,risk,risk\n0,0.2,0.3\n1,0.4,0.5\n');
    expect(oneLine(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']))).toMatch(/line 1, column risk: this column name appears more than once/);
  });
  it.each(['0b1', '0x10', '1e-1', 'Infinity', '.5.5'])('a risk written as %s', (form) => {
    const f = file(`form-${form}.csv`, `died,risk\n0,0.2\n1,${form}\n`);
    expect(oneLine(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']))).toMatch(/line 3, column risk: predicted probability is not a decimal number/);
  });
  it('bytes that are not UTF-8 text', () => {
    const f = join(dir, 'latin1.csv');
    writeFileSync(f, Buffer.from('died,risk\n0,0.2\n1,0.3\xe9\n', 'latin1'));
    expect(oneLine(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']))).toMatch(/not valid UTF-8.*line 3/);
  });
  it('a small cohort gets a caution naming the minimum and its source, in the table and the JSON', () => {
    const f = file('tiny.csv', 'died,risk\n0,0.2\n1,0.7\n0,0.1\n');
    const table = cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk', '--format', 'table']);
    expect(table.status, table.stderr).toBe(0);
    expect(table.stdout.split('\n')[0]).toMatch(/^Caution: small sample: 1 event\(s\) and 2 non-event\(s\), below the minimum of 100 of each \(Vergouwe/);
    const json = JSON.parse(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']).stdout);
    expect(json.warnings[0]).toMatch(/small sample/);
    const big = JSON.parse(execFileSync('npx', ['tsx', 'server/src/cli/main.ts', 'validate', '--csv', good, '--outcome', 'died', '--prediction', 'risk'], { encoding: 'utf8' }));
    expect(big.events).toBeLessThan(100); // the 200-row file is short of events too
    expect(big.warnings.some((w: string) => /small sample/.test(w))).toBe(true);
  });
  it('the table shows no AUC bound outside [0, 1] and says why when DeLong reached past it', () => {
    const lines = ['died,risk'];
    const y = [0, 0, 0, 1, 0, 1, 1, 1, 1, 1];
    y.forEach((v, i) => lines.push(`${v},${(i + 1) / 11}`));
    const f = file('edge.csv', lines.join('\n') + '\n');
    const json = JSON.parse(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']).stdout);
    expect(json.auc.upper).toBeGreaterThan(1); // the untruncated interval does reach past 1 on this file
    const table = cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk', '--format', 'table']).stdout;
    const aucLine = table.split('\n').find((l) => l.startsWith('AUC'))!;
    for (const x of aucLine.match(/\d+\.\d+/g)!.map(Number)) expect(x).toBeLessThanOrEqual(1);
    expect(aucLine).toContain('†');
    expect(table).toMatch(/† DeLong's interval .* truncated to \[0, 1\]/);
  });
});
