// The command line's missing-data options as a person runs them: a child process on small generated CSVs with gaps.
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { mulberry32 } from '../../../server/src/stats/bootstrap';
import { CLI_JSON_KEYS, runCli } from '../../helpers/cli';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-cli-gaps-'));
const file = (name: string, text: string) => {
  const f = join(dir, name);
  writeFileSync(f, text);
  return f;
};
const cli = runCli;

// 400 invented patients: age, lactate and ward, about 15% of each predictor empty; sicker patients (events) lack lactate more often
const r = mulberry32(2024);
const rows = ['died,age,lactate,ward'];
let withGaps = 0;
for (let i = 0; i < 400; i++) {
  const age = 40 + Math.floor(r() * 45);
  const lactate = 0.8 + 3 * r();
  const ward = ['icu', 'medical', 'surgical'][Math.floor(r() * 3)];
  const died = r() < 1 / (1 + Math.exp(-(-6 + 0.05 * age + 0.6 * lactate + (ward === 'icu' ? 0.8 : 0)))) ? 1 : 0;
  const cells = [String(age), lactate.toFixed(2), ward].map((v, j) => (r() < (j === 1 && died ? 0.3 : 0.1) ? '' : v));
  if (cells.includes('')) withGaps++;
  rows.push([died, ...cells].join(','));
}
const gaps = file('gaps.csv', rows.join('\n') + '\n');
const model = file(
  'score.json',
  JSON.stringify({
    intercept: -6,
    predictors: [
      { column: 'age', coefficient: 0.05 },
      { column: 'lactate', coefficient: 0.6 },
      { column: 'ward', coefficient: 0.8, transform: 'indicator', level: 'icu' },
    ],
  }),
);
const base = ['validate', '--csv', gaps, '--outcome', 'died', '--model', model];
const USUAL_KEYS = CLI_JSON_KEYS;

describe('plumbline validate --missing mi', () => {
  const run = (seed: string) => {
    const out = cli([...base, '--missing', 'mi', '--imputations', '5', '--iterations', '3', '--seed', seed]);
    expect(out.status, out.stderr).toBe(0);
    return JSON.parse(out.stdout);
  };
  const a = run('11');

  it('prints the usual keys for the pooled analysis plus the pooling details and the complete cases beside it', () => {
    expect(Object.keys(a)).toEqual([...USUAL_KEYS, 'missingData']);
    expect(a.n).toBe(400);
    const md = a.missingData;
    expect(md.rowsWithGaps).toBe(withGaps);
    expect(md.imputation).toMatchObject({
      imputations: 5,
      iterations: 3,
      seed: 11,
      donors: 5,
      columns: {
        age: 'predictive mean matching',
        lactate: 'predictive mean matching',
        ward: 'multinomial logistic regression',
      },
    });
    for (const k of ['auc', 'calibrationIntercept', 'calibrationSlope', 'oe']) {
      expect(Object.keys(md.pooling[k])).toEqual([
        'estimate',
        'lower',
        'upper',
        'scale',
        'pooledOnScale',
        'within',
        'between',
        'total',
        'relativeIncrease',
        'lambda',
        'fmi',
        'df',
      ]);
      expect(md.pooling[k].lower).toBeLessThan(md.pooling[k].estimate);
      expect(md.pooling[k].upper).toBeGreaterThan(md.pooling[k].estimate);
      expect(md.pooling[k].total).toBeCloseTo(md.pooling[k].within + (1 + 1 / 5) * md.pooling[k].between, 12); // Rubin 1987: T = Ū + (1 + 1/m)B
    }
    expect(md.pooling.auc.scale).toBe('logit');
    expect(md.pooling.oe.scale).toBe('log');
    expect(md.pooling.calibrationSlope.scale).toBe('identity');
    expect(a.auc.estimate).toBe(md.pooling.auc.estimate);
    expect(md.completeCase.n).toBe(400 - withGaps);
    expect(md.completeCase.leftOut).toBe(withGaps);
    expect(Object.keys(md.completeCase.result)).toEqual(USUAL_KEYS);
    expect(md.completeCase.result.n).toBe(400 - withGaps);
  });

  it('the same seed reproduces the output exactly; another seed draws differently', () => {
    expect(run('11')).toEqual(a);
    expect(run('12').missingData.pooling.auc.pooledOnScale).not.toBe(a.missingData.pooling.auc.pooledOnScale);
  });

  it('prints the pooled table with the complete cases beside it', () => {
    const t = cli([...base, '--missing', 'mi', '--imputations', '3', '--seed', '5', '--format', 'table']);
    expect(t.status, t.stderr).toBe(0);
    expect(t.stdout).toContain(`Missing predictor values: ${withGaps} of 400 rows have a gap`);
    expect(t.stdout).toMatch(/AUC \(logit scale\) +0\.\d{4} \(/);
    expect(t.stdout).toContain(`complete cases (${400 - withGaps} rows, ${withGaps} left out)`);
  });
});

describe('plumbline validate --missing mi --imputation-columns', () => {
  it('a complete extra column informs the imputation models; an extra column with a gap is refused with its line', () => {
    const withSite = file(
      'site.csv',
      rows.map((line, i) => `${line},${i === 0 ? 'site' : `s${i % 3}`}`).join('\n') + '\n',
    );
    const out = cli([
      'validate',
      '--csv',
      withSite,
      '--outcome',
      'died',
      '--model',
      model,
      '--missing',
      'mi',
      '--imputations',
      '3',
      '--seed',
      '2',
      '--imputation-columns',
      'site',
    ]);
    expect(out.status, out.stderr).toBe(0);
    const j = JSON.parse(out.stdout);
    expect(j.missingData.imputation.extraColumns).toEqual(['site']);
    const without = JSON.parse(
      cli([
        'validate',
        '--csv',
        withSite,
        '--outcome',
        'died',
        '--model',
        model,
        '--missing',
        'mi',
        '--imputations',
        '3',
        '--seed',
        '2',
      ]).stdout,
    );
    expect(j.missingData.pooling.auc.pooledOnScale).not.toBe(without.missingData.pooling.auc.pooledOnScale); // another model, other draws
    const gap = file(
      'site-gap.csv',
      rows.map((line, i) => `${line},${i === 0 ? 'site' : i === 5 ? '' : 's1'}`).join('\n') + '\n',
    );
    const bad = cli([
      'validate',
      '--csv',
      gap,
      '--outcome',
      'died',
      '--model',
      model,
      '--missing',
      'mi',
      '--imputation-columns',
      'site',
    ]);
    expect(bad.status).toBe(1);
    expect(bad.stderr).toContain(`${gap} line 6, column site: an imputation column must have a value in every row`);
  });
});

describe('plumbline validate --missing complete-case, and gaps without --missing', () => {
  it('complete cases: the rows without a gap, with the count left out', () => {
    const out = cli([...base, '--missing', 'complete-case']);
    expect(out.status, out.stderr).toBe(0);
    const j = JSON.parse(out.stdout);
    expect(j.n).toBe(400 - withGaps);
    expect(j.missingData).toMatchObject({ method: 'complete-case', rows: 400, leftOut: withGaps });
  });
  it('without --missing an empty predictor cell is refused as before, naming line and column', () => {
    const out = cli(base);
    expect(out.status).toBe(1);
    expect(out.stderr).toMatch(/line \d+, column (age|lactate): .*empty/);
  });
  it('an empty outcome is still refused with --missing mi', () => {
    const f = file('no-outcome.csv', 'died,age,lactate,ward\n1,60,2.0,icu\n,70,,medical\n0,50,1.1,\n');
    const out = cli(['validate', '--csv', f, '--outcome', 'died', '--model', model, '--missing', 'mi']);
    expect(out.status).toBe(1);
    expect(out.stderr).toContain(`${f} line 3, column died: outcome must be 0 or 1`);
  });
  it('text in a numeric predictor is refused in one line, not taken for a gap', () => {
    const f = file('text.csv', 'died,age,lactate,ward\n1,60,2.0,icu\n0,70,high,medical\n0,50,,surgical\n');
    const out = cli(['validate', '--csv', f, '--outcome', 'died', '--model', model, '--missing', 'mi']);
    expect(out.status).toBe(1);
    expect(out.stderr.trim().split('\n')).toHaveLength(1);
    expect(out.stderr).toContain(`${f} line 3, column lactate: not a decimal number: "high"`);
  });
  it.each([
    [['--missing', 'mi', '--prediction', 'age'], /exactly one of --prediction and --model|--missing needs --model/],
    [['--imputations', '5'], /--imputations needs --missing mi/],
    [['--missing', 'complete-case', '--seed', '3'], /--seed needs --missing mi/],
    [['--missing', 'sometimes'], /--missing is complete-case or mi/],
    [['--missing', 'mi', '--imputations', '1'], /--imputations is a whole number from 2/],
  ])('usage errors: %j', (extra, message) => {
    const out = cli([...base, ...extra]);
    expect(out.status).toBe(2);
    expect(out.stderr).toMatch(message);
  });
  it('--missing mi with a prediction column instead of a model is a usage error', () => {
    const f = file('pred.csv', 'died,risk\n1,0.3\n0,\n');
    const out = cli(['validate', '--csv', f, '--outcome', 'died', '--prediction', 'risk', '--missing', 'mi']);
    expect(out.status).toBe(2);
    expect(out.stderr).toMatch(/--missing needs --model/);
  });
});
