// Hosmer–Lemeshow with fewer distinct risks than groups: one group per distinct risk, so a score with three risk
// levels gets three groups and a p-value (quantile cuts used to merge the lowest two levels into one group).
import { describe, expect, it } from 'vitest';
import { hosmerLemeshow } from '../../../server/src/stats/hosmerLemeshow';
import { riskGroups } from '../../../server/src/stats/riskGroups';
import { sortCohort } from '../../../server/src/stats/sortedCohort';
import { validate } from '../../../server/src/stats/index';

// Three risk levels (invented): 50 patients at 0.1 with 7 events, 40 at 0.3 with 10, 30 at 0.6 with 20.
const LEVELS = [
  { p: 0.1, n: 50, events: 7 },
  { p: 0.3, n: 40, events: 10 },
  { p: 0.6, n: 30, events: 20 },
];
const p = Float64Array.from(LEVELS.flatMap((l) => Array<number>(l.n).fill(l.p)));
const y = Uint8Array.from(LEVELS.flatMap((l) => Array.from({ length: l.n }, (_, i) => (i < l.events ? 1 : 0))));

describe('Hosmer–Lemeshow with few distinct risks', () => {
  it.each(['quantile-type2', 'quantile-type7'] as const)('makes one group per distinct risk (%s)', (rule) => {
    const groups = riskGroups(sortCohort(p, y), 10, rule);
    expect(groups.map((g) => [g.lowerCut, g.n, g.events])).toEqual(LEVELS.map((l) => [l.p, l.n, l.events]));
    const hl = hosmerLemeshow(sortCohort(p, y), 10, rule);
    // Σ (O − E)² / (E (1 − E/n)) by hand, Hosmer & Lemeshow (1980): E = 5, 12, 18.
    const byHand = 4 / (5 * 0.9) + 4 / (12 * 0.7) + 4 / (18 * 0.4);
    expect(hl.groups).toBe(3);
    expect(hl.statistic).toBeCloseTo(byHand, 12);
    expect(hl.df).toBe(3); // external validation: df = G
    expect(hl.pValue).toBeGreaterThan(0);
    expect(hl.pValue).toBeLessThan(1);
    expect(hosmerLemeshow(sortCohort(p, y), 10, rule, 'development').df).toBe(1);
  });

  it('no longer warns of too few groups, and the grouped calibration curve shows each level', () => {
    const r = validate(p, y);
    expect(r.warnings.join(' ')).not.toMatch(/Hosmer–Lemeshow: only/);
    expect(r.calibrationCurve.grouped.map((g) => g.meanPredicted)).toEqual([0.1, 0.3, 0.6]);
  });

  it('with more distinct risks than groups still cuts at quantiles', () => {
    const many = Float64Array.from({ length: 200 }, (_, i) => 0.05 + i / 250);
    const ym = Uint8Array.from(many, (_, i) => (i % 3 === 0 ? 1 : 0));
    expect(riskGroups(sortCohort(many, ym), 10, 'quantile-type2')).toHaveLength(10);
  });
});
