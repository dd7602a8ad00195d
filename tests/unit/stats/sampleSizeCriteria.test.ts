// The planner's added criteria (Riley RD et al. 2021, Stat Med 40:4230–4251): anticipated O/E and calibration slope,
// LP distributions given as normal, beta or a cohort's risks, and the net-benefit criterion — each checked by an
// independent route (closed form, a known moment, or seeded simulation), never by the planner's own numbers.
import { describe, expect, it } from 'vitest';
import { mulberry32 } from '../../../server/src/stats/bootstrap';
import {
  betaGrid,
  empiricalGrid,
  gridInformation,
  interceptFor,
  netBenefitVariance,
  normalGrid,
  planSampleSize,
  sampleSizeOE,
} from '../../../server/src/stats/sampleSize';

const Z = 1.959963984540054;
const expit = (x: number) => 1 / (1 + Math.exp(-x));
const normal = (rand: () => number) => Math.sqrt(-2 * Math.log(1 - rand())) * Math.cos(2 * Math.PI * rand());

describe('O/E with an anticipated O/E other than 1', () => {
  it.each([0.8, 1, 1.25])('O/E %s: the planned n gives a CI no wider than asked, n − 1 a wider one', (oe) => {
    const r = sampleSizeOE(0.1, 0.3, oe);
    // CI of O/E is O/E · exp(±1.96 · SE), SE² = (1 − φ)/(nφ) (Riley et al. 2021 [mem])
    const width = (n: number) => oe * 2 * Math.sinh(Z * Math.sqrt(0.9 / (0.1 * n)));
    expect(width(r.n)).toBeLessThanOrEqual(0.3 + 1e-12);
    expect(width(r.n - 1)).toBeGreaterThan(0.3);
  });
  it('a larger anticipated O/E needs more patients for the same absolute width', () => {
    expect(sampleSizeOE(0.1, 0.3, 1.25).n).toBeGreaterThan(sampleSizeOE(0.1, 0.3, 1).n);
  });
});

describe('LP distributions', () => {
  it.each([
    [2, 8],
    [0.5, 3],
    [1, 1],
  ])('Beta(%s, %s) on the risk scale has mean risk a/(a + b)', (a, b) => {
    const g = betaGrid(a, b);
    const mean = g.x.reduce((s, x, i) => s + g.w[i] * expit(x), 0);
    expect(mean).toBeCloseTo(a / (a + b), 6); // mean of a Beta(a, b) distribution, textbook
  });

  it('a large sample of a normal LP as a cohort gives the normal grid’s information within 2%', () => {
    const rand = mulberry32(77);
    const risks = Float64Array.from({ length: 100_000 }, () => expit(-1.2 + 0.9 * normal(rand)));
    const e = gridInformation(empiricalGrid(risks), -0.3, 0.8);
    const n = gridInformation(normalGrid(-1.2, 0.9), -0.3, 0.8);
    expect(Math.abs(e.i00 / n.i00 - 1)).toBeLessThan(0.02);
    expect(Math.abs(e.i11 / n.i11 - 1)).toBeLessThan(0.02);
  });

  it('the intercept makes the mean true risk the event rate, for any anticipated slope', () => {
    const g = normalGrid(-2, 1);
    for (const slope of [0.7, 1, 1.3]) {
      const a = interceptFor(g, slope, 0.15);
      expect(g.x.reduce((s, x, i) => s + g.w[i] * expit(a + slope * x), 0)).toBeCloseTo(0.15, 10);
    }
  });
});

describe('calibration slope with an anticipated slope, by simulation', () => {
  it('cohorts of the planned n drawn from expit(α + β·LP) give fitted slopes whose SD is width/3.92 (±10%)', () => {
    const plan = planSampleSize({
      eventRate: 0.2,
      auc: 0.75,
      ciWidthSlope: 0.4,
      anticipatedSlope: 0.8,
      lpDistribution: 'normal',
      lpMean: -1.5,
      lpSd: 1,
    });
    const n = plan.criteria[0].n;
    const { intercept, slope } = plan.lpDistribution!;
    expect(slope).toBe(0.8);
    const rand = mulberry32(4242);
    const fits: number[] = [];
    for (let r = 0; r < 300; r++) {
      const x = Float64Array.from({ length: n }, () => -1.5 + normal(rand));
      const y = Uint8Array.from(x, (v) => (rand() < expit(intercept + slope * v) ? 1 : 0));
      fits.push(fitSlope(x, y));
    }
    const mean = fits.reduce((s, v) => s + v, 0) / fits.length;
    const sd = Math.sqrt(fits.reduce((s, v) => s + (v - mean) ** 2, 0) / (fits.length - 1));
    // 300 replicates know the SD to about ±4% (1/√(2·299))
    expect(sd / (0.4 / (2 * Z))).toBeGreaterThan(0.9);
    expect(sd / (0.4 / (2 * Z))).toBeLessThan(1.1);
    expect(Math.abs(mean - 0.8)).toBeLessThan(0.03);
  });
});

/** Logistic regression y ~ 1 + x by Newton–Raphson (the textbook iteration), returning the slope. */
function fitSlope(x: Float64Array, y: Uint8Array): number {
  let a = 0;
  let b = 0;
  for (let it = 0; it < 25; it++) {
    let g0 = 0;
    let g1 = 0;
    let h00 = 0;
    let h01 = 0;
    let h11 = 0;
    for (let i = 0; i < x.length; i++) {
      const p = expit(a + b * x[i]);
      const w = p * (1 - p);
      g0 += y[i] - p;
      g1 += (y[i] - p) * x[i];
      h00 += w;
      h01 += w * x[i];
      h11 += w * x[i] * x[i];
    }
    const det = h00 * h11 - h01 * h01;
    a += (h11 * g0 - h01 * g1) / det;
    b += (h00 * g1 - h01 * g0) / det;
  }
  return b;
}

describe('net benefit criterion', () => {
  it('the SE of standardised net benefit it designs for matches seeded simulation within 5%', () => {
    const [phi, sens, spec, t] = [0.15, 0.8, 0.7, 0.1];
    const plan = planSampleSize({
      eventRate: phi,
      auc: 0.75,
      ciWidthNb: 0.2,
      threshold: t,
      sensitivity: sens,
      specificity: spec,
    });
    const c = plan.criteria[0];
    expect(c.criterion).toBe('netBenefit');
    const n = c.n;
    const rand = mulberry32(99);
    const snb: number[] = [];
    for (let r = 0; r < 2000; r++) {
      let ev = 0;
      let tp = 0;
      let fp = 0;
      for (let i = 0; i < n; i++) {
        const y = rand() < phi;
        const pos = rand() < (y ? sens : 1 - spec);
        if (y) ev++;
        if (y && pos) tp++;
        if (!y && pos) fp++;
      }
      // sNB = NB / φ̂, NB = TP/n − FP/n · t/(1 − t) (Vickers & Elkin 2006; Kerr et al. 2016)
      snb.push((tp / n - (fp / n) * (t / (1 - t))) / (ev / n));
    }
    const mean = snb.reduce((s, v) => s + v, 0) / snb.length;
    const sd = Math.sqrt(snb.reduce((s, v) => s + (v - mean) ** 2, 0) / (snb.length - 1));
    expect(sd / c.targetSe).toBeGreaterThan(0.95);
    expect(sd / c.targetSe).toBeLessThan(1.05);
    expect(Math.sqrt(netBenefitVariance(phi, sens, spec, t) / n)).toBeLessThanOrEqual(c.targetSe + 1e-12);
  });
});

describe('the plan', () => {
  it('lists every criterion asked for and marks the largest', () => {
    const plan = planSampleSize({
      eventRate: 0.1,
      auc: 0.75,
      ciWidthOE: 0.3,
      ciWidthAuc: 0.1,
      ciWidthSlope: 0.3,
      ciWidthNb: 0.2,
      anticipatedOE: 1.1,
      anticipatedSlope: 0.9,
      lpDistribution: 'beta',
      betaA: 1,
      betaB: 9,
      threshold: 0.1,
      sensitivity: 0.75,
      specificity: 0.7,
    });
    expect(plan.criteria.map((c) => c.criterion)).toEqual(['oe', 'auc', 'slope', 'netBenefit']);
    expect(plan.largest!.n).toBe(Math.max(...plan.criteria.map((c) => c.n)));
    expect(plan.lpDistribution).toMatchObject({ kind: 'beta', a: 1, b: 9, slope: 0.9 });
    expect(() => planSampleSize({ eventRate: 0.1, auc: 0.75, ciWidthNb: 0.2 })).toThrow(RangeError);
    expect(() => planSampleSize({ eventRate: 0.1, auc: 0.75, ciWidthSlope: 0.2, lpDistribution: 'beta' })).toThrow(
      RangeError,
    );
  });
});
