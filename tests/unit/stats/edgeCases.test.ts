// Engine behaviour at the edges: ties, tiny cohorts, separation, p of exactly 0 and 1, refused input, bootstrap.
import { describe, expect, it } from 'vitest';
import { EngineInputError, validate } from '../../../server/src/stats/index';
import { applyModel, rcsTerm } from '../../../server/src/stats/applyModel';
import { checkInputs } from '../../../server/src/stats/checkInputs';
import { bootstrapInWorkers } from '../../../server/src/jobs/threads/pool';
import { resolveSettings } from '../../../server/src/stats/fullSet';

const f = (a: number[]) => Float64Array.from(a);
const u = (a: number[]) => Uint8Array.from(a);

describe('refused input names the row', () => {
  it.each([
    [[0.2, 0.5], [0, 2], /row 2: outcome must be 0 or 1/],
    [[0.2, 1.5], [0, 1], /row 2: .*outside \[0, 1\]/],
    [[NaN, 0.5], [0, 1], /row 1: .*not a number/],
    [[-0.1, 0.5], [0, 1], /row 1: .*outside/],
    [[], [], /empty/],
    [[0.2, 0.3], [0, 0], /no events/],
    [[0.2, 0.3], [1, 1], /no non-events/],
  ])('%j / %j', (p, y, msg) => {
    expect(() => validate(f(p), u(y))).toThrow(msg);
    const c = checkInputs(p, y);
    expect(c.ok).toBe(false);
  });
  it('is an EngineInputError with the row', () => {
    try {
      validate(f([0.1, 0.2, 7]), u([0, 1, 1]));
    } catch (e) {
      expect(e).toBeInstanceOf(EngineInputError);
      expect((e as EngineInputError).row).toBe(3);
    }
  });
});

describe('edge cohorts', () => {
  it('all ties: AUC ½, slope degenerate, no NaN without a warning', () => {
    const r = validate(f([0.3, 0.3, 0.3, 0.3]), u([0, 1, 0, 1]));
    expect(r.auc.estimate).toBe(0.5);
    expect(r.calibrationSlope.converged).toBe(false);
    if (!r.calibrationSlope.converged) expect(r.calibrationSlope.reason).toBe('degenerate');
    expect(r.hosmerLemeshow.groups).toBe(1);
    expect(r.warnings.join(' ')).toMatch(/slope not estimable/);
  });
  it('n = 2: AUC 1, SE not estimable and said so, slope separated', () => {
    const r = validate(f([0.2, 0.8]), u([0, 1]));
    expect(r.auc.estimate).toBe(1);
    expect(Number.isNaN(r.auc.se)).toBe(true);
    expect(r.warnings.join(' ')).toMatch(/DeLong standard error needs/);
    expect(r.calibrationSlope.converged).toBe(false);
    expect(r.calibrationIntercept.converged).toBe(true);
  });
  it('a single event among many', () => {
    const p = f(Array.from({ length: 50 }, (_, i) => (i + 1) / 60));
    const y = u(Array.from({ length: 50 }, (_, i) => (i === 30 ? 1 : 0)));
    const r = validate(p, y);
    expect(r.events).toBe(1);
    expect(r.auc.estimate).toBeCloseTo(30 / 49, 12); // 30 of the 49 non-events rank below the event
  });
  it('perfect separation: AUC 1 and the slope reported as not estimable', () => {
    const r = validate(f([0.1, 0.2, 0.3, 0.7, 0.8, 0.9]), u([0, 0, 0, 1, 1, 1]));
    expect(r.auc.estimate).toBe(1);
    expect(r.calibrationSlope.converged === false && r.calibrationSlope.reason).toBe('separation');
  });
  it('p exactly 0 and 1 are counted, handled by clamping, and said so', () => {
    const r = validate(f([0, 0.2, 0.6, 1, 0.4, 0.5]), u([0, 0, 1, 1, 1, 0]));
    expect(r.extremeProbabilities.zeros).toBe(1);
    expect(r.extremeProbabilities.ones).toBe(1);
    expect(r.extremeProbabilities.handling).toMatch(/clamped to \[1e-15/);
    expect(r.warnings.some((w) => /exactly 0/.test(w))).toBe(true);
    expect(Number.isFinite(r.logLoss)).toBe(true);
    // a confident wrong 0 costs ln(1e15) ≈ 34.5: check on a cohort where the event has p = 0
    const bad = validate(f([0, 0.5]), u([1, 0]));
    expect(bad.logLossTotal).toBeCloseTo(-Math.log(1e-15) + Math.log(2), 6);
  });
});

describe('applyModel', () => {
  const model = {
    intercept: -2,
    predictors: [
      { column: 'age', coefficient: 0.03, transform: 'linear' as const },
      { column: 'creat', coefficient: 0.5, transform: 'log' as const },
      { column: 'sex', coefficient: 0.4, transform: 'indicator' as const, level: 'F' },
      { column: 'age', coefficient: 0.01, transform: 'rcs' as const, knots: [30, 50, 70, 90], term: 1 },
    ],
  };
  it('combines linear, log, indicator and spline terms', () => {
    const r = applyModel(model, { age: ['60'], creat: ['2'], sex: ['F'] }, 1);
    if (!r.ok) throw new Error(r.message);
    // rcs term 1 at 60 with knots 30,50,70,90 (Harrell 2015 §2.4.5, norm (90−30)²): (30³ − 0 + 0) / 3600 = 7.5
    expect(rcsTerm(60, [30, 50, 70, 90], 1)).toBeCloseTo(27000 / 3600, 12);
    const lp = -2 + 0.03 * 60 + 0.5 * Math.log(2) + 0.4 + 0.01 * 7.5;
    expect(r.linearPredictor[0]).toBeCloseTo(lp, 12);
    expect(r.p[0]).toBeCloseTo(1 / (1 + Math.exp(-lp)), 12);
  });
  it('the spline is linear beyond the last knot (restricted)', () => {
    const k = [30, 50, 70, 90];
    const d1 = rcsTerm(110, k, 2) - rcsTerm(100, k, 2);
    const d2 = rcsTerm(120, k, 2) - rcsTerm(110, k, 2);
    expect(d1).toBeCloseTo(d2, 9);
    expect(rcsTerm(30, k, 1)).toBe(0);
  });
  it('refuses log of a non-positive value, naming the row', () => {
    const r = applyModel(model, { age: ['60', '61'], creat: ['2', '0'], sex: ['M', 'F'] }, 2);
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.message).toMatch(/row 2: column creat must be positive/);
  });
});

describe('bootstrap', () => {
  const n = 600;
  const p = new Float64Array(n);
  const y = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    p[i] = 0.05 + (0.9 * ((i * 7919) % n)) / n;
    y[i] = (i * 104729) % 1000 < p[i] * 1000 ? 1 : 0;
  }
  it('is deterministic for a seed and differs for another', () => {
    const a = validate(p, y, { bootstrapReplicates: 30, bootstrapSeed: 5 });
    const b = validate(p, y, { bootstrapReplicates: 30, bootstrapSeed: 5 });
    const c = validate(p, y, { bootstrapReplicates: 30, bootstrapSeed: 6 });
    expect(a.bootstrap).toEqual(b.bootstrap);
    expect(a.bootstrap!.intervals.auc).not.toEqual(c.bootstrap!.intervals.auc);
    expect(a.bootstrap!.intervals.auc.lower).toBeLessThan(a.auc.estimate);
    expect(a.bootstrap!.intervals.auc.upper).toBeGreaterThan(a.auc.estimate);
  });
  it('gives the same intervals in two worker threads as in one thread', async () => {
    const single = validate(p, y, { bootstrapReplicates: 20, bootstrapSeed: 9 });
    const s = resolveSettings({ bootstrapReplicates: 20, bootstrapSeed: 9 });
    const pooled = await bootstrapInWorkers(p, y, s, single, 2);
    expect(pooled.workers).toBe(2);
    expect(pooled.intervals).toEqual(single.bootstrap!.intervals);
  });
});
