// The precision a cohort gives (precisionFor, shown on run and cohort pages) is the inverse of the planner
// (planSampleSize): the n the planner asks for a 95% CI width w gives a width of at most w, and one patient fewer gives
// more than w. Both are the formulas of Riley RD, Debray TPA, Collins GS, et al. (2021), Stat Med 40:4230–4251; the
// inversion itself is algebra on those formulas (common practice, no source).
import { describe, expect, it } from 'vitest';
import { planSampleSize, precisionFor } from '../../../server/src/stats/sampleSize';

describe('precisionFor inverts planSampleSize', () => {
  it.each([
    // event rate, AUC, target widths (AUC, O/E, slope)
    [0.018, 0.8, 0.1, 1, 0.2], // the setting of Riley et al. 2021's worked example [pub]
    [0.12, 0.72, 0.1, 0.2, 0.2], // the planner's default inputs
    [0.3, 0.65, 0.05, 0.15, 0.3],
  ])('event rate %s, AUC %s', (eventRate, auc, ciWidthAuc, ciWidthOE, ciWidthSlope) => {
    const plan = planSampleSize({ eventRate, auc, ciWidthAuc, ciWidthOE, ciWidthSlope });
    const byCriterion = Object.fromEntries(plan.criteria.map((c) => [c.criterion, c]));
    for (const [criterion, target] of [
      ['oe', ciWidthOE],
      ['auc', ciWidthAuc],
      ['slope', ciWidthSlope],
    ] as const) {
      const n = byCriterion[criterion].n;
      const at = precisionFor(n, eventRate, auc)[criterion];
      const below = precisionFor(n - 1, eventRate, auc)[criterion];
      expect(at, `${criterion}: width at the planned n`).not.toBeNull();
      expect(at!, `${criterion}: n = ${n} gives at most the target width`).toBeLessThanOrEqual(target + 1e-12);
      expect(below!, `${criterion}: n − 1 = ${n - 1} gives more than the target width`).toBeGreaterThan(target);
    }
  });

  it('the slope width is not given for an AUC of 0.5 or less', () => {
    expect(precisionFor(1000, 0.2, 0.5).slope).toBeNull();
    expect(precisionFor(1000, 0.2, 0.45).slope).toBeNull();
  });

  it('widths shrink like 1/√n (O/E and slope exactly, AUC nearly)', () => {
    const a = precisionFor(1000, 0.1, 0.75);
    const b = precisionFor(4000, 0.1, 0.75);
    expect(a.slope! / b.slope!).toBeCloseTo(2, 10); // SE ∝ 1/√n in the slope formula (algebra)
    // O/E's width is 2·sinh(1.96·SE): close to, but not exactly, proportional to SE
    expect(a.oe! / b.oe!).toBeGreaterThan(1.98);
    expect(a.oe! / b.oe!).toBeLessThan(2.02);
    expect(a.auc! / b.auc!).toBeGreaterThan(1.95);
    expect(a.auc! / b.auc!).toBeLessThan(2.05);
  });
});
