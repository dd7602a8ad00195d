// Engine against scikit-learn and statsmodels (Debian's /usr/bin/python3), run here on seeded data this test generates.
import { describe, expect, it } from 'vitest';
import { validate } from '../../server/src/stats/index';
import { cohort, relErr, runPython, skipPython, writeCsv } from './tools';

const SCRIPT = `
import sys, json, numpy as np, pandas as pd, statsmodels.api as sm
from sklearn.metrics import roc_auc_score, log_loss, brier_score_loss
d = pd.read_csv(sys.argv[1]); p = d['p'].to_numpy(); y = d['y'].to_numpy()
lp = np.log(np.clip(p, 1e-15, 1 - 1e-15) / (1 - np.clip(p, 1e-15, 1 - 1e-15)))
ci = sm.GLM(y, np.ones((len(y), 1)), family=sm.families.Binomial(), offset=lp).fit(tol=1e-14, maxiter=200)
cs = sm.GLM(y, sm.add_constant(lp), family=sm.families.Binomial()).fit(tol=1e-14, maxiter=200)
print(json.dumps({
  'auc': roc_auc_score(y, p), 'logLoss': log_loss(y, p), 'brier': brier_score_loss(y, p),
  'int': ci.params[0], 'intSe': ci.bse[0], 'slope': cs.params[1], 'slopeSe': cs.bse[1], 'slopeInt': cs.params[0],
}))`;

describe.skipIf(skipPython)('scikit-learn 1.2 and statsmodels 0.13 on generated cohorts', () => {
  const cases = [
    { name: 'n = 2,000, miscalibrated', n: 2000, seed: 11, opts: { a: 0.3, b: 0.7 } },
    { name: 'n = 5,000, risks rounded to 2 d.p. (many ties)', n: 5000, seed: 12, opts: { digits: 2 } },
    { name: 'n = 20,000, rare outcome', n: 20000, seed: 13, opts: { mu: -3.5, a: -0.2, b: 1.1 } },
  ];
  it.each(cases)('$name', ({ n, seed, opts }) => {
    const { p, y } = cohort(n, seed, opts);
    const ref = runPython(SCRIPT, writeCsv({ p, y }));
    const r = validate(p, y);
    if (!r.calibrationIntercept.converged || !r.calibrationSlope.converged) throw new Error('fit failed');
    expect(relErr(r.auc.estimate, ref.auc)).toBeLessThan(1e-12); // sklearn roc_auc_score [ref]
    expect(relErr(r.logLoss, ref.logLoss)).toBeLessThan(1e-10); // sklearn log_loss (eps 1e-15) [ref]
    expect(relErr(r.brier, ref.brier)).toBeLessThan(1e-10); // sklearn brier_score_loss [ref]
    expect(relErr(r.calibrationIntercept.estimate, ref.int)).toBeLessThan(1e-8); // statsmodels GLM Binomial, offset logit(p) [ref]
    expect(relErr(r.calibrationIntercept.se, ref.intSe)).toBeLessThan(1e-8); // ibid. [ref]
    expect(relErr(r.calibrationSlope.estimate, ref.slope)).toBeLessThan(1e-8); // statsmodels GLM Binomial on logit(p) [ref]
    expect(relErr(r.calibrationSlope.se, ref.slopeSe)).toBeLessThan(1e-8); // ibid. [ref]
    expect(relErr(r.calibrationSlope.intercept, ref.slopeInt)).toBeLessThan(1e-8); // ibid. [ref]
  });
});
