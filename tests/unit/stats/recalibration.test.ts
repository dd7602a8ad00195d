// Model updating: intercept update and logistic recalibration (Cox 1958, Biometrika 45:562–565) fitted by maximum
// likelihood, the transformed formula, and the closed test (Vergouwe et al. 2017, Stat Med 36:4529–4539).
import { execFileSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { ScoreModel } from '@shared/model';
import { closedTest } from '../../../server/src/stats/closedTest';
import {
  interceptUpdate,
  logisticRecalibration,
  recalibratedProbabilities,
  transformModel,
} from '../../../server/src/stats/recalibration';

function mulberry32(seed: number) {
  return () => {
    seed = (seed + 0x6d2b79f5) | 0;
    let t = Math.imul(seed ^ (seed >>> 15), 1 | seed);
    t = (t + Math.imul(t ^ (t >>> 7), 61 | t)) ^ t;
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

const model: ScoreModel = {
  intercept: -2.1,
  predictors: [
    { column: 'age', coefficient: 0.03, transform: 'linear' },
    { column: 'los', coefficient: 0.4, transform: 'log' },
    { column: 'emergency', coefficient: 0.6, transform: 'indicator', level: 'yes' },
  ],
};

/** Patients whose true risk is expit(shift + slope·lp) where lp is the score's linear predictor. */
function generate(n: number, slope: number, shift: number, seed: number) {
  const rnd = mulberry32(seed);
  const lp = new Float64Array(n);
  const y = new Uint8Array(n);
  const age = new Float64Array(n);
  const los = new Float64Array(n);
  const em: string[] = [];
  for (let i = 0; i < n; i++) {
    age[i] = 20 + 70 * rnd();
    los[i] = 1 + 20 * rnd();
    em.push(rnd() < 0.4 ? 'yes' : 'no');
    lp[i] = model.intercept + 0.03 * age[i] + 0.4 * Math.log(los[i]) + (em[i] === 'yes' ? 0.6 : 0);
    y[i] = rnd() < 1 / (1 + Math.exp(-(shift + slope * lp[i]))) ? 1 : 0;
  }
  return { lp, y, age, los, em };
}

describe('recalibration', () => {
  // Truth: logit P = −0.3 + 0.8·lp (slope 0.8, intercept shift −0.3), as the issue specifies.
  const d = generate(20_000, 0.8, -0.3, 2026);

  it('logistic recalibration recovers slope 0.8 and intercept −0.3 within its 95% CI', () => {
    const r = logisticRecalibration(d.lp, d.y);
    if (!r.converged) throw new Error(r.detail);
    expect(r.b.lower).toBeLessThan(0.8);
    expect(r.b.upper).toBeGreaterThan(0.8);
    expect(r.a.lower).toBeLessThan(-0.3);
    expect(r.a.upper).toBeGreaterThan(-0.3);
  });

  it('intercept update recovers a pure shift of −0.3 within its CI', () => {
    const s = generate(20_000, 1, -0.3, 7);
    const r = interceptUpdate(s.lp, s.y);
    if (!r.converged) throw new Error(r.detail);
    expect(r.a.lower).toBeLessThan(-0.3);
    expect(r.a.upper).toBeGreaterThan(-0.3);
    expect(r.b.estimate).toBe(1);
  });

  it('the transformed coefficients reproduce the recalibrated predictions to 1e-12', () => {
    const r = logisticRecalibration(d.lp, d.y);
    if (!r.converged) throw new Error(r.detail);
    const m2 = transformModel(model, r.a.estimate, r.b.estimate);
    const direct = recalibratedProbabilities(d.lp, r.a.estimate, r.b.estimate);
    let maxDiff = 0;
    for (let i = 0; i < d.lp.length; i++) {
      const eta =
        m2.intercept +
        m2.predictors[0].coefficient * d.age[i] +
        m2.predictors[1].coefficient * Math.log(d.los[i]) +
        (d.em[i] === 'yes' ? m2.predictors[2].coefficient : 0);
      maxDiff = Math.max(maxDiff, Math.abs(1 / (1 + Math.exp(-eta)) - direct[i]));
    }
    expect(maxDiff).toBeLessThan(1e-12);
    expect(m2.intercept).toBeCloseTo(r.a.estimate + r.b.estimate * -2.1, 14);
  });

  it('matches statsmodels GLM (Binomial, logit) on the same data', () => {
    const small = generate(3000, 0.8, -0.3, 99);
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-recal-'));
    const file = join(dir, 'd.csv');
    writeFileSync(file, 'lp,y\n' + Array.from(small.lp, (v, i) => `${v.toPrecision(17)},${small.y[i]}`).join('\n'));
    const py = `
import sys, json, numpy as np, pandas as pd, statsmodels.api as sm
d = pd.read_csv(sys.argv[1])
X = sm.add_constant(d['lp'])
f = sm.GLM(d['y'], X, family=sm.families.Binomial()).fit(tol=1e-12)
g = sm.GLM(d['y'], np.ones((len(d), 1)), family=sm.families.Binomial(), offset=d['lp']).fit(tol=1e-12)
print(json.dumps({'a': f.params[0], 'b': f.params[1], 'sea': f.bse[0], 'seb': f.bse[1], 'll': f.llf, 'ai': g.params[0], 'seai': g.bse[0], 'lli': g.llf}))`;
    // Reference library: statsmodels 0.13 (Debian) GLM Binomial with logit link, run by /usr/bin/python3
    const ref = JSON.parse(execFileSync('/usr/bin/python3', ['-c', py, file], { encoding: 'utf8' }));
    const r = logisticRecalibration(small.lp, small.y);
    const i = interceptUpdate(small.lp, small.y);
    if (!r.converged || !i.converged) throw new Error('fit failed');
    expect(r.a.estimate).toBeCloseTo(ref.a, 7); // statsmodels GLM [ref]
    expect(r.b.estimate).toBeCloseTo(ref.b, 7); // statsmodels GLM [ref]
    expect(r.a.se).toBeCloseTo(ref.sea, 6); // statsmodels GLM [ref]
    expect(r.b.se).toBeCloseTo(ref.seb, 6); // statsmodels GLM [ref]
    expect(r.logLik).toBeCloseTo(ref.ll, 6); // statsmodels GLM [ref]
    expect(i.a.estimate).toBeCloseTo(ref.ai, 7); // statsmodels GLM with offset [ref]
    expect(i.a.se).toBeCloseTo(ref.seai, 6); // statsmodels GLM with offset [ref]
    expect(i.logLik).toBeCloseTo(ref.lli, 6); // statsmodels GLM with offset [ref]
  });
});

describe('closed test', () => {
  const pick = (slope: number, shift: number, seed: number) => {
    const d = generate(20_000, slope, shift, seed);
    const r = closedTest(d.lp, d.y);
    if (!r.converged) throw new Error(r.detail);
    return r;
  };

  it('keeps the original score when it is well calibrated', () => {
    const r = pick(1, 0, 11);
    expect(r.choice).toBe('original');
    expect(r.tests).toHaveLength(1);
    expect(r.tests[0].df).toBe(2);
  });

  it('chooses the intercept update for a pure shift', () => {
    const r = pick(1, -0.5, 12);
    expect(r.choice).toBe('intercept');
    expect(r.tests.map((t) => t.df)).toEqual([2, 1]);
  });

  it('chooses logistic recalibration when the slope is off', () => {
    const r = pick(0.6, -0.3, 13);
    expect(r.choice).toBe('logistic');
    expect(r.tests[1].significant).toBe(true);
  });
});
