// The command line as a person runs it: a child process on a small generated CSV.
import { execFileSync } from 'node:child_process';
import { chmodSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { mulberry32 } from '../../../server/src/stats/bootstrap';
import { siteAnalysis } from '../../../server/src/stats/groupPerformance';
import { validate } from '../../../server/src/stats/index';
import { CLI_JSON_KEYS, runCli } from '../../helpers/cli';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-cli-'));
const rows = ['risk,died,age'];
for (let i = 0; i < 200; i++)
  rows.push(`${((i % 19) + 1) / 20},${(i * 37) % 100 < ((i % 19) + 1) * 5 ? 1 : 0},${40 + (i % 50)}`);
const good = join(dir, 'cohort.csv');
writeFileSync(good, rows.join('\n') + '\n');
const bad = join(dir, 'bad.csv');
writeFileSync(bad, ['risk,died', '0.2,0', '0.3,1', '0.4,yes'].join('\n') + '\n');
const cli = runCli;

describe('plumbline validate', () => {
  it('prints exactly the documented JSON keys', () => {
    const out = JSON.parse(
      execFileSync(
        'npx',
        [
          'tsx',
          'server/src/cli/main.ts',
          'validate',
          '--csv',
          good,
          '--outcome',
          'died',
          '--prediction',
          'risk',
          '--thresholds',
          '0.1,0.3',
        ],
        { encoding: 'utf8' },
      ),
    );
    expect(Object.keys(out)).toEqual(CLI_JSON_KEYS);
    expect(out.n).toBe(200);
    expect(Object.keys(out.auc)).toEqual(['estimate', 'lower', 'upper', 'se']);
    expect(Object.keys(out.hosmerLemeshow)).toEqual(['statistic', 'df', 'pValue', 'groups']);
    expect(Object.keys(out.calibrationIntercept)).toEqual(['estimate', 'lower', 'upper', 'se']);
    expect(Object.keys(out.calibrationSlope)).toEqual(['estimate', 'lower', 'upper', 'se']);
    expect(out.calibrationIntercept.se).toBeCloseTo(
      (out.calibrationIntercept.upper - out.calibrationIntercept.lower) / (2 * 1.959963984540054),
      12,
    );
    expect(Object.keys(out.netBenefit[0])).toEqual(['threshold', 'model', 'treatAll', 'standardized']);
    expect(out.netBenefit.map((r: { threshold: number }) => r.threshold)).toEqual([0.1, 0.3]);
    expect(Object.keys(out.thresholds[0])).toEqual([
      'threshold',
      'sensitivity',
      'specificity',
      'ppv',
      'npv',
      'tp',
      'fp',
      'tn',
      'fn',
    ]);
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
  const file = (name: string, text: string) => {
    const f = join(dir, name);
    writeFileSync(f, text);
    return f;
  };

  it('a missing file and a folder', () => {
    expect(
      oneLine(cli(['validate', '--csv', join(dir, 'nope.csv'), '--outcome', 'died', '--prediction', 'risk'])),
    ).toMatch(/nope\.csv: file not found/);
    expect(oneLine(cli(['validate', '--csv', dir, '--outcome', 'died', '--prediction', 'risk']))).toMatch(
      /is a folder, not a CSV file/,
    );
  });
  // root reads any file whatever its mode, so this can only be shown as another user.
  it.skipIf(process.getuid?.() === 0)('an unreadable file', () => {
    const f = file('locked.csv', 'risk,died\n0.2,0\n');
    chmodSync(f, 0o000);
    expect(oneLine(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']))).toMatch(
      /cannot be read \(permission denied\)/,
    );
  });
  it('a duplicated column name', () => {
    const f = file('dup.csv', 'died,risk,risk\n0,0.2,0.3\n1,0.4,0.5\n');
    expect(oneLine(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']))).toMatch(
      /line 1, column risk: this column name appears more than once/,
    );
  });
  it.each(['0b1', '0x10', '1e-1', 'Infinity', '.5.5'])('a risk written as %s', (form) => {
    const f = file(`form-${form}.csv`, `died,risk\n0,0.2\n1,${form}\n`);
    expect(oneLine(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']))).toMatch(
      /line 3, column risk: predicted probability is not a decimal number/,
    );
  });
  it('bytes that are not UTF-8 text', () => {
    const f = join(dir, 'latin1.csv');
    writeFileSync(f, Buffer.from('died,risk\n0,0.2\n1,0.3\xe9\n', 'latin1'));
    expect(oneLine(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']))).toMatch(
      /not valid UTF-8.*line 3/,
    );
  });
  it('a small cohort gets a caution naming the minimum and its source, in the table and the JSON', () => {
    const f = file('tiny.csv', 'died,risk\n0,0.2\n1,0.7\n0,0.1\n');
    const table = cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk', '--format', 'table']);
    expect(table.status, table.stderr).toBe(0);
    expect(table.stdout.split('\n')[0]).toMatch(
      /^Caution: small sample: 1 event\(s\) and 2 non-event\(s\), below the minimum of 100 of each \(Vergouwe/,
    );
    const json = JSON.parse(cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk']).stdout);
    expect(json.warnings[0]).toMatch(/small sample/);
    const big = JSON.parse(
      execFileSync(
        'npx',
        ['tsx', 'server/src/cli/main.ts', 'validate', '--csv', good, '--outcome', 'died', '--prediction', 'risk'],
        { encoding: 'utf8' },
      ),
    );
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
    const table = cli([
      'validate',
      '--csv',
      f,
      '--outcome',
      'died',
      '--prediction',
      'risk',
      '--format',
      'table',
    ]).stdout;
    const aucLine = table.split('\n').find((l) => l.startsWith('AUC'))!;
    for (const x of aucLine.match(/\d+\.\d+/g)!.map(Number)) expect(x).toBeLessThanOrEqual(1);
    expect(aucLine).toContain('†');
    expect(table).toMatch(/† DeLong's interval .* truncated to \[0, 1\]/);
  });
});

describe('plumbline validate: --bootstrap, --group and --site', () => {
  // 1,800 invented rows over three sites and two subgroups; the south site runs higher than the score predicts
  const rand = mulberry32(19);
  const lines = ['risk,died,sex,site'];
  const p: number[] = [];
  const y: number[] = [];
  const sex: string[] = [];
  const site: string[] = [];
  for (let i = 0; i < 1800; i++) {
    const z = Math.sqrt(-2 * Math.log(1 - rand())) * Math.cos(2 * Math.PI * rand());
    const risk = Number((1 / (1 + Math.exp(-(-1.2 + z)))).toFixed(6));
    const s = ['north', 'south', 'east'][i % 3];
    const died = rand() < 1 / (1 + Math.exp(-((s === 'south' ? 0.5 : 0) + Math.log(risk / (1 - risk))))) ? 1 : 0;
    const g = rand() < 0.5 ? 'F' : 'M';
    lines.push(`${risk},${died},${g},${s}`);
    p.push(risk);
    y.push(died);
    sex.push(g);
    site.push(s);
  }
  const multi = join(dir, 'multi.csv');
  writeFileSync(multi, lines.join('\n') + '\n');
  const run = (extra: string[]) => {
    const r = cli([
      'validate',
      '--csv',
      multi,
      '--outcome',
      'died',
      '--prediction',
      'risk',
      '--thresholds',
      '0.1,0.2',
      ...extra,
    ]);
    expect(r.status, r.stderr).toBe(0);
    return r.stdout;
  };
  const P = Float64Array.from(p);
  const Y = Uint8Array.from(y);

  it('--bootstrap N --seed S prints the same intervals as the engine, the same again for the same seed', () => {
    const out = JSON.parse(run(['--bootstrap', '60', '--seed', '7']));
    const r = validate(P, Y, { thresholds: [0.1, 0.2], bootstrapReplicates: 60, bootstrapSeed: 7 });
    expect(Object.keys(out.bootstrap)).toEqual([
      'replicates',
      'seed',
      'method',
      'brier',
      'scaledBrier',
      'ici',
      'e50',
      'e90',
      'emax',
      'netBenefit',
      'calibrationBand',
    ]);
    for (const k of ['brier', 'scaledBrier', 'ici', 'e50', 'e90', 'emax']) {
      expect(out.bootstrap[k].lower, k).toBe(r.bootstrap!.intervals[k].lower);
      expect(out.bootstrap[k].upper, k).toBe(r.bootstrap!.intervals[k].upper);
    }
    expect(out.bootstrap.netBenefit[1].standardized.upper).toBe(
      r.bootstrap!.intervals['standardizedNetBenefit@0.2'].upper,
    );
    expect(out.bootstrap.calibrationBand.p).toHaveLength(r.calibrationCurve.smoothed.p.length);
    expect(JSON.parse(run(['--bootstrap', '60', '--seed', '7'])).bootstrap).toEqual(out.bootstrap);
    expect(JSON.parse(run(['--bootstrap', '60', '--seed', '8'])).bootstrap.brier).not.toEqual(out.bootstrap.brier);
    const table = run(['--bootstrap', '60', '--seed', '7', '--format', 'table']);
    expect(table).toMatch(/Bootstrap 95% CIs \(60 replicates, seed 7/);
    expect(table).toMatch(/^Scaled Brier +\d/m);
    expect(table).toMatch(/^Calibration slope .*, SE \d\.\d{4}$/m);
  });

  it('--group prints each level as the engine computes it on that subset, and the heterogeneity test', () => {
    const out = JSON.parse(run(['--group', 'sex']));
    expect(out.subgroups).toHaveLength(1);
    const g = out.subgroups[0];
    expect(g.column).toBe('sex');
    expect(g.levels.map((l: { level: string }) => l.level)).toEqual(['F', 'M']);
    for (const l of g.levels) {
      const idx = sex.flatMap((s, i) => (s === l.level ? [i] : []));
      const r = validate(
        Float64Array.from(idx, (i) => p[i]),
        Uint8Array.from(idx, (i) => y[i]),
        { thresholds: [0.1, 0.2] },
      );
      expect(l.n).toBe(r.n);
      expect(l.auc.estimate).toBe(r.auc.estimate); // the engine on the subset, exactly
      expect(l.calibrationSlope.se).toBe(r.calibrationSlope.converged ? r.calibrationSlope.se : NaN);
      expect(l.oe.estimate).toBe(r.oe.estimate);
    }
    expect(g.heterogeneity.logOe.result.df).toBe(1);
    expect(g.heterogeneity.calibrationIntercept.result.method).toMatch(/Cochran/);
    const table = run(['--group', 'sex', '--format', 'table']);
    expect(table).toMatch(/^Subgroups by sex$/m);
    expect(table).toMatch(/log O\/E: Q = [\d.]+ on 1 df/);
  });

  it('--site prints per-site figures and the random-effects pooled results', () => {
    const out = JSON.parse(run(['--site', 'site']));
    const ref = siteAnalysis(P, Y, site, { thresholds: [0.1, 0.2] });
    expect(out.sites.levels.map((l: { level: string }) => l.level)).toEqual(['east', 'north', 'south']);
    expect(out.sites.pooled.logOe.result.tau2).toBe(ref.pooled.logOe.result!.tau2);
    expect(out.sites.pooled.logitAuc.result.natural.estimate).toBe(ref.pooled.logitAuc.result!.natural.estimate);
    expect(out.sites.pooled.calibrationSlope.result.predictionInterval.df).toBe(1);
    const table = run(['--site', 'site', '--format', 'table']);
    expect(table).toMatch(/^Sites by site$/m);
    expect(table).toMatch(/^ {2}O\/E: [\d.]+ \(95% CI .*95% prediction interval .*τ² = .*I² = .*%/m);
  });

  it('refuses options that do not fit together, in one line', () => {
    for (const [extra, msg] of [
      [['--seed', '3'], /--seed goes with --bootstrap/],
      [['--bootstrap', 'ten'], /--bootstrap is a whole number/],
      [['--bootstrap', '10', '--seed', '-1'], /--seed is a whole number/],
    ] as [string[], RegExp][]) {
      const r = cli(['validate', '--csv', multi, '--outcome', 'died', '--prediction', 'risk', ...extra]);
      expect(r.status).toBe(2);
      expect(r.stderr).toMatch(msg);
    }
    const r = cli(['validate', '--csv', multi, '--outcome', 'died', '--prediction', 'risk', '--group', 'ward']);
    expect(r.status).toBe(1);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stderr).toMatch(/line 1, column ward: no such column/);
  });
});
