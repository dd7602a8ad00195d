// Multiple imputation engine (server/src/stats/chainedImputation.ts and its parts): seeding, the predictive-mean-matching
// donor rule, the categorical draws and Rubin's rules on hand-checkable inputs. Data are generated here, seeded.
import { describe, expect, it } from 'vitest';
import { mulberry32 } from '../../../server/src/stats/bootstrap';
import { categoricalImpute } from '../../../server/src/stats/categoricalImputation';
import { imputeOnce, multipleImputation, type ImputationInput } from '../../../server/src/stats/chainedImputation';
import { pmmImpute, pmmMatch } from '../../../server/src/stats/predictiveMeanMatching';
import { normalDraw } from '../../../server/src/stats/randomDraws';
import { validateWithGaps } from '../../../server/src/stats/pooledValidation';
import { poolMetric, poolScalar } from '../../../server/src/stats/rubinsRules';

/** x1 ~ N(50, 10), x2 correlated with x1, x3 a 3-level category; y from all three; gaps MAR on y and x1. */
function cohortWithGaps(n: number, seed: number) {
  const r = mulberry32(seed);
  const x1 = new Float64Array(n),
    x2 = new Float64Array(n),
    x3 = new Float64Array(n),
    y = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    x1[i] = 50 + 10 * normalDraw(r);
    x2[i] = (0.5 * (x1[i] - 50)) / 10 + normalDraw(r);
    x3[i] = Math.floor(r() * 3);
    y[i] = r() < 1 / (1 + Math.exp(-(-1.5 + 0.06 * (x1[i] - 50) + 0.5 * x2[i] + 0.4 * x3[i]))) ? 1 : 0;
  }
  const g1 = Float64Array.from(x1),
    g2 = Float64Array.from(x2),
    g3 = Float64Array.from(x3);
  for (let i = 0; i < n; i++) {
    if (r() < (y[i] ? 0.45 : 0.1)) g1[i] = NaN;
    if (r() < (x1[i] > 55 ? 0.35 : 0.1)) g2[i] = NaN;
    if (r() < 0.15) g3[i] = NaN;
  }
  const input: ImputationInput = {
    outcome: y,
    columns: [
      { name: 'x1', kind: 'numeric', values: g1 },
      { name: 'x2', kind: 'numeric', values: g2 },
      { name: 'x3', kind: 'categorical', levels: 3, values: g3 },
    ],
  };
  return { input, full: { x1, x2, x3 }, y };
}

const mean = (a: ArrayLike<number>) => Array.from(a).reduce((s, v) => s + v, 0) / a.length;

describe('chained imputation: seeds', () => {
  const { input } = cohortWithGaps(600, 7);
  const settings = { imputations: 3, iterations: 3, seed: 99, donors: 5 };

  it('the same seed gives identical completed data sets, bit for bit', () => {
    const a = multipleImputation(input, settings);
    const b = multipleImputation(input, settings);
    expect(a.map((set) => set.map((c) => Array.from(c)))).toEqual(b.map((set) => set.map((c) => Array.from(c))));
  });

  it('a chain does not depend on the chains computed before it (threads may share them out)', () => {
    const all = multipleImputation(input, settings);
    expect(Array.from(imputeOnce(input, settings, 2)[0])).toEqual(Array.from(all[2][0]));
  });

  it('a different seed, and a different chain, give different draws; observed values never change', () => {
    const a = multipleImputation(input, settings);
    const b = multipleImputation(input, { ...settings, seed: 100 });
    const gaps = [...input.columns[0].values.keys()].filter((i) => Number.isNaN(input.columns[0].values[i]));
    expect(gaps.length).toBeGreaterThan(50);
    expect(gaps.filter((i) => a[0][0][i] !== b[0][0][i]).length).toBeGreaterThan(gaps.length / 2);
    expect(gaps.filter((i) => a[0][0][i] !== a[1][0][i]).length).toBeGreaterThan(gaps.length / 2);
    for (const set of [...a, ...b]) {
      set.forEach((col, j) => {
        const orig = input.columns[j].values;
        for (let i = 0; i < orig.length; i++) if (!Number.isNaN(orig[i])) expect(col[i]).toBe(orig[i]);
        expect(col.every((v) => !Number.isNaN(v))).toBe(true);
      });
    }
  });

  it('categorical imputations are levels 0 … K−1 only, and every level occurs', () => {
    const set = multipleImputation(input, { ...settings, imputations: 1 })[0];
    const gaps = [...input.columns[2].values.keys()].filter((i) => Number.isNaN(input.columns[2].values[i]));
    const drawn = new Set(gaps.map((i) => set[2][i]));
    expect([...drawn].sort()).toEqual([0, 1, 2]);
  });
});

describe('predictive mean matching: the published donor rule (Morris, White & Royston 2014, BMC Med Res Methodol 14:75)', () => {
  it('every imputed value is the observed value of its donor, and donors are observed rows', () => {
    const { input } = cohortWithGaps(800, 11);
    const target = Float64Array.from(input.columns[0].values);
    const observed = Uint8Array.from(target, (v) => (Number.isNaN(v) ? 0 : 1));
    const observedValues = new Set(Array.from(target).filter((v) => !Number.isNaN(v)));
    const design = [
      Float64Array.from(input.outcome),
      Float64Array.from(input.columns[1].values, (v) => (Number.isNaN(v) ? 0 : v)),
    ];
    const donors = pmmImpute(target, observed, design, mulberry32(3), 5);
    const gaps = [...observed.keys()].filter((i) => !observed[i]);
    expect(donors.length).toBe(gaps.length);
    gaps.forEach((i, k) => {
      expect(observed[donors[k]]).toBe(1);
      expect(target[i]).toBe(target[donors[k]]); // PMM imputes the donor's observed value, Little 1988
      expect(observedValues.has(target[i])).toBe(true);
    });
  });

  it('type-1 matching: the donor is one of the d rows whose mean predicted from β̂ is nearest the target predicted from β*, each equally often', () => {
    // one covariate x; observed rows predict x itself (β̂ = [0, 1]), the missing row predicts 0.3 (β* = [0.3, 0])
    const n = 41;
    const x = Float64Array.from({ length: n }, (_, i) => i / 10); // 0, 0.1, …, 4.0; row 40 is the one to fill
    const observed = Uint8Array.from({ length: n }, (_, i) => (i === 40 ? 0 : 1));
    const counts = new Map<number, number>();
    const rand = mulberry32(5);
    for (let k = 0; k < 5000; k++) {
      const target = Float64Array.from(x, (v) => v * 100);
      const [donor] = pmmMatch(target, observed, [x], [0, 1], [0.3, 0], rand, 5);
      counts.set(donor, (counts.get(donor) ?? 0) + 1);
      expect(target[40]).toBe(donor * 10);
    }
    // nearest five predicted means to 0.3 are rows 1 … 5 (0.1 … 0.5); rows 1 and 5 tie at 0.2, both within d = 5
    expect([...counts.keys()].sort((a, b) => a - b)).toEqual([1, 2, 3, 4, 5]); // the d = 5 nearest, Morris et al. 2014 (type-1 matching)
    for (const c of counts.values()) expect(Math.abs(c - 1000)).toBeLessThan(4 * Math.sqrt(5000 * 0.2 * 0.8)); // 1/d each
  });

  it('with d = 1 the donor is the single nearest', () => {
    const x = Float64Array.from({ length: 21 }, (_, i) => i);
    const observed = Uint8Array.from({ length: 21 }, (_, i) => (i === 20 ? 0 : 1));
    const target = Float64Array.from(x);
    const [donor] = pmmMatch(target, observed, [x], [0, 1], [7.2, 0], mulberry32(1), 1);
    expect(donor).toBe(7); // nearest predicted mean to 7.2 (Little 1988; Morris et al. 2014)
  });
});

describe('categorical imputation', () => {
  it('binary: imputed share follows the fitted model, and perfect prediction does not stop the multinomial fit', () => {
    const r = mulberry32(21);
    const n = 4000;
    const x = Float64Array.from({ length: n }, () => normalDraw(r));
    const b = Float64Array.from(x, (v) => (r() < 1 / (1 + Math.exp(-(0.5 + 1.5 * v))) ? 1 : 0));
    const observed = Uint8Array.from({ length: n }, () => (r() < 0.7 ? 1 : 0));
    const target = Float64Array.from(b);
    categoricalImpute(target, observed, [x], 2, mulberry32(4));
    const gaps = [...observed.keys()].filter((i) => !observed[i]);
    const expected = mean(gaps.map((i) => 1 / (1 + Math.exp(-(0.5 + 1.5 * x[i])))));
    const got = mean(gaps.map((i) => target[i]));
    expect(Math.abs(got - expected)).toBeLessThan(4 * Math.sqrt((expected * (1 - expected)) / gaps.length) + 0.03);
    // a 3-level column perfectly predicted by x: augmentation keeps the fit finite (White, Daniel & Royston 2010)
    const sep = Float64Array.from(x, (v) => (v < -0.5 ? 0 : v < 0.5 ? 1 : 2));
    const t3 = Float64Array.from(sep);
    categoricalImpute(t3, observed, [x], 3, mulberry32(6));
    const agree = mean(gaps.map((i) => (t3[i] === sep[i] ? 1 : 0)));
    expect(agree).toBeGreaterThan(0.8);
  });
});

describe('multiple imputation recovers what complete cases miss (MAR on the outcome; simulation, seed 7)', () => {
  it('the pooled mean of x1 is within its interval of the full-data mean; the complete-case mean is not', () => {
    const { input, full } = cohortWithGaps(4000, 7);
    const sets = multipleImputation(input, { imputations: 10, iterations: 5, seed: 1, donors: 5 });
    const n = input.outcome.length;
    const q = sets.map((s) => mean(s[0]));
    const u = sets.map((s) => {
      const m = mean(s[0]);
      return s[0].reduce((a, v) => a + (v - m) ** 2, 0) / (n - 1) / n;
    });
    const pooled = poolScalar(q, u, n - 1);
    const truth = mean(full.x1);
    const cc = Array.from(input.columns[0].values).filter((v) => !Number.isNaN(v));
    const ccMean = mean(cc);
    const ccSe = Math.sqrt(cc.reduce((a, v) => a + (v - ccMean) ** 2, 0) / (cc.length - 1) / cc.length);
    expect(truth).toBeGreaterThan(pooled.lower); // full-data mean of the simulated x1 (seed 7)
    expect(truth).toBeLessThan(pooled.upper); // ibid.
    // events have higher x1 and are missing more often, so complete cases understate the mean
    expect(ccMean).toBeLessThan(truth - 3 * ccSe);
    expect(pooled.fmi).toBeGreaterThan(0);
    expect(pooled.fmi).toBeLessThan(1);
  });
});

describe("Rubin's rules by hand", () => {
  it('identical estimates: no between variance, total = within, λ at 0', () => {
    const p = poolScalar([2, 2, 2], [0.04, 0.04, 0.04]);
    expect(p.between).toBe(0); // B = var(Q) = 0, Rubin 1987 §3.1
    expect(p.total).toBeCloseTo(0.04, 15); // T = Ū + (1 + 1/m)·0, ibid.
    expect(p.lambda).toBe(0); // λ = (1 + 1/m)B/T, ibid.
    expect(p.qbar).toBe(2); // Q̄ = mean Q, ibid.
  });
  it('Q = (1, 2, 3), U = (1, 1, 1): B = 1, T = 1 + 4/3, r = 4/3, λ = 4/7 (Rubin 1987, §3.1 formulas)', () => {
    const p = poolScalar([1, 2, 3], [1, 1, 1]);
    expect(p.qbar).toBe(2); // Q̄, Rubin 1987 §3.1
    expect(p.between).toBeCloseTo(1, 15); // B = Σ(Q − Q̄)²/(m − 1) = 2/2, ibid.
    expect(p.total).toBeCloseTo(7 / 3, 14); // T = 1 + (4/3)·1, ibid.
    expect(p.riv).toBeCloseTo(4 / 3, 14); // r = (1 + 1/m)B/Ū, ibid.
    expect(p.lambda).toBeCloseTo(4 / 7, 14); // λ = (4/3)/(7/3), ibid.
    expect(p.df).toBeCloseTo(2 / (4 / 7) ** 2, 12); // ν_old = (m − 1)/λ², Rubin 1987
  });
  it('logit-scale AUC pooling transforms back inside (0, 1) and keeps the estimate between the inputs', () => {
    const p = poolMetric([0.7, 0.72, 0.74], [0.02, 0.02, 0.02], 'logit');
    expect(p.estimate).toBeGreaterThan(0.7);
    expect(p.estimate).toBeLessThan(0.74);
    expect(p.estimateLower).toBeGreaterThan(0);
    expect(p.estimateUpper).toBeLessThan(1);
  });
});

describe('validation with gaps: complete cases beside multiple imputation (simulation, seeds stated)', () => {
  // the score is the true model, so on the full data O/E ≈ 1; x1 has gaps, either on the outcome (MAR) or at random (MCAR)
  const model = {
    intercept: -1.5 - 0.1 * 50,
    predictors: [
      { column: 'x1', coefficient: 0.1, transform: 'linear' as const },
      { column: 'x2', coefficient: 0.5, transform: 'linear' as const },
    ],
  };
  function run(mechanism: 'MAR' | 'MCAR', seed: number) {
    const r = mulberry32(seed);
    const n = 3000;
    const x1 = new Float64Array(n),
      x2 = new Float64Array(n),
      y = new Uint8Array(n);
    for (let i = 0; i < n; i++) {
      x1[i] = 50 + 10 * normalDraw(r);
      x2[i] = 0.05 * (x1[i] - 50) + normalDraw(r);
      y[i] = r() < 1 / (1 + Math.exp(-(-1.5 + 0.1 * (x1[i] - 50) + 0.5 * x2[i]))) ? 1 : 0;
    }
    const g1 = Float64Array.from(x1, (v, i) => (r() < (mechanism === 'MAR' ? (y[i] ? 0.6 : 0.05) : 0.2) ? NaN : v));
    const full = validateWithGaps(
      model,
      y,
      [
        { name: 'x1', kind: 'numeric', values: x1 },
        { name: 'x2', kind: 'numeric', values: x2 },
      ],
      { imputations: 2, iterations: 1, seed: 1, donors: 5 },
    ).completeCase.result!;
    const gaps = validateWithGaps(
      model,
      y,
      [
        { name: 'x1', kind: 'numeric', values: g1 },
        { name: 'x2', kind: 'numeric', values: x2 },
      ],
      { imputations: 10, iterations: 5, seed: seed + 1, donors: 5 },
    );
    return { full, gaps };
  }

  it('MAR on the outcome (seed 41): complete cases understate O/E beyond their interval; the pooled O/E and AUC intervals hold the full-data values', () => {
    const { full, gaps } = run('MAR', 41);
    const cc = gaps.completeCase.result!;
    const p = gaps.imputed.pooled;
    expect(cc.oe.upper).toBeLessThan(full.oe.estimate); // events are left out more often (the design of this simulation)
    expect(full.oe.estimate).toBeGreaterThan(p.oe.estimateLower); // O/E on the simulated data before the gaps (seed 41)
    expect(full.oe.estimate).toBeLessThan(p.oe.estimateUpper); // ibid.
    expect(full.auc.estimate).toBeGreaterThan(p.auc.estimateLower); // AUC on the data before the gaps (seed 41)
    expect(full.auc.estimate).toBeLessThan(p.auc.estimateUpper); // ibid.
    expect(p.oe.fmi).toBeGreaterThan(0);
  });

  it('MCAR (seed 42): complete cases and the pooled analysis both hold the full-data O/E and AUC', () => {
    const { full, gaps } = run('MCAR', 42);
    const cc = gaps.completeCase.result!;
    const p = gaps.imputed.pooled;
    expect(gaps.completeCase.leftOut).toBeGreaterThan(500);
    for (const [lo, hi] of [
      [cc.oe.lower, cc.oe.upper],
      [p.oe.estimateLower, p.oe.estimateUpper],
    ]) {
      expect(full.oe.estimate).toBeGreaterThan(lo);
      expect(full.oe.estimate).toBeLessThan(hi);
    }
    for (const [lo, hi] of [
      [cc.auc.lower, cc.auc.upper],
      [p.auc.estimateLower, p.auc.estimateUpper],
    ]) {
      expect(full.auc.estimate).toBeGreaterThan(lo);
      expect(full.auc.estimate).toBeLessThan(hi);
    }
  });

  it('without gaps every completed set is the data itself: pooled = complete-case values, B = 0, nothing left out', () => {
    const r = mulberry32(43);
    const x1 = Float64Array.from({ length: 500 }, () => 50 + 10 * normalDraw(r));
    const x2 = Float64Array.from({ length: 500 }, () => normalDraw(r));
    const y = Uint8Array.from(x1, (v, i) => (r() < 1 / (1 + Math.exp(-(-6.5 + 0.1 * v + 0.5 * x2[i]))) ? 1 : 0));
    const a = validateWithGaps(
      model,
      y,
      [
        { name: 'x1', kind: 'numeric', values: x1 },
        { name: 'x2', kind: 'numeric', values: x2 },
      ],
      { imputations: 3, iterations: 2, seed: 1, donors: 5 },
    );
    const cc = a.completeCase.result!;
    expect(a.completeCase.leftOut).toBe(0);
    expect(a.imputed.pooled.auc.between).toBe(0); // identical sets: B = 0 (Rubin 1987 §3.1)
    expect(a.imputed.pooled.auc.estimate).toBeCloseTo(cc.auc.estimate, 12);
    expect(a.imputed.pooled.calibrationSlope!.estimate).toBeCloseTo(
      (cc.calibrationSlope as { estimate: number }).estimate,
      12,
    );
    expect(a.imputed.pooled.calibrationSlope!.total).toBeCloseTo((cc.calibrationSlope as { se: number }).se ** 2, 12); // T = Ū when B = 0
  });
});
