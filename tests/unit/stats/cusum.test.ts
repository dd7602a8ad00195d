// Risk-adjusted CUSUM (Steiner, Cook, Farewell & Treasure 2000, Biostatistics 1:441–452), O − E curve
// (Lovegrove et al. 1997, Lancet 350:1128–1130) and funnel limits (Spiegelhalter 2005, Stat Med 24:1185–1202),
// checked against hand calculations on small stated series.
import { describe, expect, it } from 'vitest';
import { cusumWeight, riskAdjustedCusum } from '../../../server/src/stats/riskAdjustedCusum';
import { observedMinusExpected } from '../../../server/src/stats/observedMinusExpected';
import { funnelLimits, funnelLimitsFor } from '../../../server/src/stats/funnelLimits';

// Series: p = 0.2, 0.5, 0.1, 0.5, 0.3, 0.4 with y = 1, 1, 0, 1, 1, 0; RA = 2.
// Hand calculation, W = y·ln 2 − ln(1 − p + 2p) = y·ln 2 − ln(1 + p), ln 2 = 0.693147:
//   t1: 0.693147 − ln 1.2 (0.182322) = 0.510826   X1 = 0.510826
//   t2: 0.693147 − ln 1.5 (0.405465) = 0.287682   X2 = 0.798508
//   t3: 0       − ln 1.1 (0.095310) = −0.095310   X3 = 0.703198
//   t4: 0.287682                                  X4 = 0.990880
//   t5: 0.693147 − ln 1.3 (0.262364) = 0.430783   X5 = 1.421663  ≥ h = 1.2 → signal, reset to 0
//   t6: 0       − ln 1.4 (0.336472) = −0.336472   X6 = max(0, −0.336472) = 0
const p = [0.2, 0.5, 0.1, 0.5, 0.3, 0.4];
const y = [1, 1, 0, 1, 1, 0];

describe('risk-adjusted CUSUM', () => {
  it('weights match the hand calculation', () => {
    const w = p.map((pi, i) => cusumWeight(pi, y[i], 2));
    const hand = [0.510826, 0.287682, -0.09531, 0.287682, 0.430783, -0.336472]; // hand calculation above
    w.forEach((wi, i) => expect(wi).toBeCloseTo(hand[i], 5));
  });

  it('accumulates, signals at h, resets to 0 and never goes below 0', () => {
    const r = riskAdjustedCusum(p, y, { oddsRatio: 2, h: 1.2 });
    expect(r.signals).toHaveLength(1);
    expect(r.signals[0].index).toBe(4); // fifth patient, hand calculation above
    expect(r.signals[0].value).toBeCloseTo(1.421663, 5);
    const values = r.series
      .filter((s, i, all) => i === all.length - 1 || all[i + 1].index !== s.index)
      .map((s) => s.value);
    const hand = [0.510826, 0.798508, 0.703198, 0.99088, 0, 0]; // after reset at t5
    values.forEach((v, i) => expect(v).toBeCloseTo(hand[i], 5));
    expect(r.finalValue).toBe(0);
  });

  it('does not signal when h is above the running maximum', () => {
    const r = riskAdjustedCusum(p, y, { oddsRatio: 2, h: 1.5 }); // max X = 1.421663 < 1.5
    expect(r.signals).toHaveLength(0);
    expect(r.maxValue).toBeCloseTo(1.421663, 5);
  });

  it('with RA = 0.5 monitors improvement as a lower chart', () => {
    // y = 0 weights: −ln(1 − p/2); for p = 0.5: −ln 0.75 = 0.287682; ten event-free p = 0.5 patients reach 2.876821
    const pp = new Array(10).fill(0.5);
    const yy = new Array(10).fill(0);
    const r = riskAdjustedCusum(pp, yy, { oddsRatio: 0.5, h: 2 });
    expect(r.direction).toBe('improvement');
    // cumulative 0.287682·k ≥ 2 first at k = 7 (2.013775), index 6; reset; then 3 more → −0.863046
    expect(r.signals.map((s) => s.index)).toEqual([6]);
    expect(r.signals[0].value).toBeCloseTo(-2.013775, 5);
    expect(r.finalValue).toBeCloseTo(-0.863046, 5);
  });

  it('keeps every signal exact when the plot series is downsampled', () => {
    const n = 10_000;
    const pp = new Float64Array(n).fill(0.1);
    const yy = new Uint8Array(n);
    for (let i = 0; i < n; i++) yy[i] = i % 5 === 0 ? 1 : 0; // 20% events against 10% predicted
    const full = riskAdjustedCusum(pp, yy, { maxPoints: n * 2 });
    const thin = riskAdjustedCusum(pp, yy, { maxPoints: 200 });
    expect(thin.signals).toEqual(full.signals);
    expect(full.signals.length).toBeGreaterThan(5);
    expect(thin.series.length).toBeLessThan(200 + 2 * thin.signals.length + 2);
  });
});

describe('cumulative O − E', () => {
  it('sums y − p in order', () => {
    const r = observedMinusExpected(p, y);
    // hand: 0.8, 1.3, 1.2, 1.7, 2.4, 2.0
    expect(r.series.map((s) => s.value).map((v) => Number(v.toFixed(6)))).toEqual([0.8, 1.3, 1.2, 1.7, 2.4, 2]);
    expect(r.observed).toBe(4);
    expect(r.expected).toBeCloseTo(2, 12);
  });
});

describe('funnel limits', () => {
  it('are ±z·sqrt(Σp(1−p)) around 0 for O − E', () => {
    // hand: Σp(1−p) = 0.16 + 0.25 + 0.09 + 0.25 + 0.21 + 0.24 = 1.2; sqrt = 1.095445
    const r = funnelLimitsFor(p, y);
    expect(r.variance).toBeCloseTo(1.2, 12);
    expect(r.limits95.oMinusE[1]).toBeCloseTo(1.959964 * 1.095445, 5); // z(0.975) = 1.959964, common practice
    expect(r.limits998.oMinusE[1]).toBeCloseTo(3.090232 * 1.095445, 5); // z(0.999) = 3.090232, Spiegelhalter 2005
    expect(r.oMinusE).toBeCloseTo(2, 12);
    expect(r.status).toBe('inside'); // 2 < 2.147
  });

  it('widen for small periods and classify', () => {
    const small = funnelLimits(12, 10, 9.9); // E = 10 from 1,000 patients at p = 0.01
    const large = funnelLimits(120, 100, 99); // E = 100
    expect(small.limits95.oe[1] - 1).toBeGreaterThan(large.limits95.oe[1] - 1);
    expect(funnelLimits(125, 100, 90).status).toBe('warning'); // 25 > 1.96·9.49 = 18.6, < 3.09·9.49 = 29.3
    expect(funnelLimits(135, 100, 90).status).toBe('outside');
  });
});
