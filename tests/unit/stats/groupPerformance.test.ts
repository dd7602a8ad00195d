// Per-level figures are the engine's own single-cohort results on each subset (exact), levels below the published
// minimum are flagged and kept, refused levels are kept with their reason, and the ICI bootstrap is seeded.
import { describe, expect, it } from 'vitest';
import { validate } from '../../../server/src/stats/index';
import {
  BLANK_LEVEL,
  performanceByLevel,
  siteAnalysis,
  subgroupAnalysis,
} from '../../../server/src/stats/groupPerformance';
import { oeFromCounts } from '../../../server/src/stats/observedExpected';
import { cohort } from '../../reference/tools';

const { p, y } = cohort(1500, 71, { digits: 8 });
const groups = Array.from({ length: p.length }, (_, i) =>
  i % 7 === 0 ? 'women 65+' : i % 3 === 0 ? 'men' : i % 11 === 0 ? '' : 'women',
);

function subset(label: string) {
  const idx = groups.flatMap((g, i) => ((g === '' ? BLANK_LEVEL : g) === label ? [i] : []));
  return { p: Float64Array.from(idx, (i) => p[i]), y: Uint8Array.from(idx, (i) => y[i]) };
}

describe('performance by level', () => {
  const levels = performanceByLevel(p, y, groups, { bootstrapReplicates: 40, bootstrapSeed: 5 });

  it('has one entry per level, blank values as their own level, in a stable order', () => {
    expect(levels.map((l) => l.level)).toEqual([BLANK_LEVEL, 'men', 'women', 'women 65+']);
    expect(levels.reduce((s, l) => s + l.n, 0)).toBe(p.length);
  });

  it.each([BLANK_LEVEL, 'men', 'women', 'women 65+'])('level %s equals validate() on its rows exactly', (label) => {
    const l = levels.find((x) => x.level === label)!;
    const s = subset(label);
    const r = validate(s.p, s.y, { bootstrapReplicates: 40, bootstrapSeed: 5 });
    expect(l.n).toBe(r.n);
    expect(l.events).toBe(r.events);
    expect(l.auc).toEqual(r.auc); // the engine's own DeLong result on the subset
    const ci = r.calibrationIntercept;
    const sl = r.calibrationSlope;
    expect(ci.converged && sl.converged).toBe(true);
    if (ci.converged)
      expect(l.calibrationIntercept).toEqual({ estimate: ci.estimate, lower: ci.lower, upper: ci.upper, se: ci.se });
    if (sl.converged)
      expect(l.calibrationSlope).toEqual({ estimate: sl.estimate, lower: sl.lower, upper: sl.upper, se: sl.se });
    expect(l.oe).toEqual({
      estimate: r.oe.estimate,
      lower: r.oe.lower,
      upper: r.oe.upper,
      seLog: oeFromCounts(r.oe.observed, r.oe.expected, r.n).seLog,
    });
    expect(l.ici).toEqual({
      estimate: r.ici,
      lower: r.bootstrap!.intervals.ici.lower,
      upper: r.bootstrap!.intervals.ici.upper,
    });
    expect(l.ici!.lower).toBeLessThan(l.ici!.upper);
  });

  it.each([BLANK_LEVEL, 'men', 'women', 'women 65+'])(
    "level %s carries the whole cohort's smoothed curve computed on its rows, on a bounded grid",
    (label) => {
      const curve = levels.find((x) => x.level === label)!.calibrationCurve!;
      const s = subset(label);
      expect(curve).toEqual(validate(s.p, s.y).calibrationCurve.smoothed); // same loess, span and grid, exactly
      expect(curve.p.length).toBeGreaterThan(10);
      expect(curve.p.length).toBeLessThanOrEqual(100); // the default grid size (fullSet.ts loessGridSize)
      expect(curve).not.toEqual(validate(p, y).calibrationCurve.smoothed);
    },
  );

  it('keeps the curve bounded however many rows a level has (the grid size setting)', () => {
    const small = performanceByLevel(p, y, groups, { loessGridSize: 12 });
    for (const l of small) expect(l.calibrationCurve!.p.length).toBeLessThanOrEqual(12);
  });

  it('flags levels below 100 events or non-events and keeps them', () => {
    for (const l of levels) expect(l.belowMinimum).toBe(l.events < 100 || l.nonEvents < 100); // Vergouwe et al. 2005 minimum, shared/src/adequacy.ts
    expect(levels.some((l) => l.belowMinimum)).toBe(true);
    expect(levels.some((l) => !l.belowMinimum)).toBe(true);
  });

  it('keeps a level the engine refuses (no events) with its reason, and leaves it out of pooled analyses', () => {
    const g2 = groups.map((g, i) => (i < 5 ? 'tiny' : g));
    const y2 = Uint8Array.from(y, (v, i) => (i < 5 ? 0 : v));
    const a = subgroupAnalysis(p, y2, g2);
    const tiny = a.levels.find((l) => l.level === 'tiny')!;
    expect(tiny.error).toMatch(/event/);
    expect(tiny.calibrationCurve).toBeNull();
    expect(tiny.n).toBe(5);
    expect(tiny.belowMinimum).toBe(true);
    expect(a.heterogeneity.logOe.excluded.map((e) => e.level)).toContain('tiny');
    expect(a.heterogeneity.logOe.levels).not.toContain('tiny');
    expect(a.heterogeneity.logOe.result!.df).toBe(a.heterogeneity.logOe.levels.length - 1);
  });

  it('the ICI bootstrap is the same for the same seed and differs for another', () => {
    const again = performanceByLevel(p, y, groups, { bootstrapReplicates: 40, bootstrapSeed: 5 });
    const other = performanceByLevel(p, y, groups, { bootstrapReplicates: 40, bootstrapSeed: 6 });
    expect(again.map((l) => l.ici)).toEqual(levels.map((l) => l.ici));
    expect(other.map((l) => l.ici)).not.toEqual(levels.map((l) => l.ici));
  });

  it('without replicates the ICI interval is absent (NaN), not invented', () => {
    const plain = performanceByLevel(p, y, groups);
    expect(plain.every((l) => Number.isNaN(l.ici!.lower) && Number.isNaN(l.ici!.upper))).toBe(true);
  });

  it('site analysis pools every estimable metric and back-transforms AUC and O/E', () => {
    const s = siteAnalysis(p, y, groups);
    const auc = s.pooled.logitAuc.result!;
    expect(s.pooled.logitAuc.levels).toHaveLength(4);
    expect(auc.natural.estimate).toBeCloseTo(1 / (1 + Math.exp(-auc.estimate)), 15);
    expect(s.pooled.logOe.result!.natural.estimate).toBeCloseTo(Math.exp(s.pooled.logOe.result!.estimate), 15);
    expect(auc.natural.predictionLower).toBeLessThan(auc.natural.lower);
  });

  it('refuses mismatched lengths', () => {
    expect(() => performanceByLevel(p, y, groups.slice(1))).toThrow(RangeError);
  });
});
