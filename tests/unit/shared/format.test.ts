// The one way numbers and dates are written for people (shared/src/format.ts), on client and server alike.
import { describe, expect, it } from 'vitest';
import {
  FIGURE_DECIMALS,
  formatCount,
  formatDate,
  formatDateTime,
  formatEstimate,
  formatEstimateShort,
  formatFigure,
  formatNumber,
  formatPercent,
  formatPercentTrim,
  formatPValue,
  formatThresholdList,
  formatTimestamp,
} from '@shared/format';

describe('numbers', () => {
  it('separates thousands and fixes the decimals', () => {
    expect(formatCount(20000)).toBe('20,000');
    expect(formatCount(1234567)).toBe('1,234,567');
    expect(formatCount(999)).toBe('999');
    expect(formatNumber(12345.6789, 2)).toBe('12,345.68');
    expect(formatNumber(0.5, 3)).toBe('0.500');
    expect(formatNumber(-1.25, 1)).toBe('-1.3');
  });

  it('never prints a negative zero', () => {
    expect(formatNumber(-0.0001, 3)).toBe('0.000');
    expect(formatNumber(-0, 2)).toBe('0.00');
    expect(formatNumber(-0.0006, 3)).toBe('-0.001');
  });

  it('writes a dash for what is not a finite number', () => {
    for (const x of [NaN, Infinity, -Infinity, null, undefined]) expect(formatNumber(x, 2)).toBe('—');
    expect(formatPercent(NaN)).toBe('—');
    expect(formatEstimate('auc', null)).toBe('—');
  });

  it('gives each figure the same decimals everywhere', () => {
    expect(formatFigure('auc', 0.81234)).toBe('0.812');
    expect(formatFigure('oe', 1.0449)).toBe('1.04');
    expect(formatFigure('brier', 0.123456)).toBe('0.1235');
    expect(FIGURE_DECIMALS.calibrationSlope).toBe(FIGURE_DECIMALS.calibrationIntercept);
  });

  it('writes estimates with their interval in words, and a short form for tables', () => {
    const e = { estimate: 0.05, lower: -0.2, upper: 0.3 };
    expect(formatEstimate('calibrationIntercept', e)).toBe('0.050 (95% CI -0.200 to 0.300)');
    expect(formatEstimateShort('oe', { estimate: 1.04, lower: 0.81, upper: 1.333 })).toBe('1.04 (0.81 to 1.33)');
  });

  it('writes percentages', () => {
    expect(formatPercent(0.15)).toBe('15.0%');
    expect(formatPercent(0.12345, 2)).toBe('12.35%');
    expect(formatPercentTrim(0.05)).toBe('5%');
    expect(formatPercentTrim(0.125)).toBe('12.5%');
    expect(formatPercentTrim(0.07)).toBe('7%'); // 0.07 * 100 is 7.000000000000001 in floating point
  });
});

describe('p-values', () => {
  it('writes p < 0.001 below a thousandth, never 0.000', () => {
    expect(formatPValue(0.0004)).toBe('p < 0.001');
    expect(formatPValue(1e-12)).toBe('p < 0.001');
    expect(formatPValue(0)).toBe('p < 0.001');
  });
  it('writes three decimals otherwise', () => {
    expect(formatPValue(0.001)).toBe('p = 0.001');
    expect(formatPValue(0.03449)).toBe('p = 0.034');
    expect(formatPValue(0.971073)).toBe('p = 0.971');
    expect(formatPValue(0.9996)).toBe('p > 0.999');
    expect(formatPValue(NaN)).toBe('p not available');
  });
});

describe('dates', () => {
  it('writes ISO calendar dates in UTC', () => {
    expect(formatDate('2026-03-31T23:30:00Z')).toBe('2026-03-31');
    expect(formatDate(new Date(Date.UTC(2026, 0, 2, 0, 5)))).toBe('2026-01-02');
  });
  it('keeps a plain date as it is, without a time-zone shift', () => {
    expect(formatDate('2026-06-30')).toBe('2026-06-30');
  });
  it('writes date and time in UTC and says so', () => {
    expect(formatDateTime('2026-12-03T10:53:58.123Z')).toBe('2026-12-03 10:53 UTC');
    expect(formatTimestamp('2026-12-03T10:53:58.123Z')).toBe('2026-12-03 10:53:58 UTC');
    expect(formatDateTime('2026-12-03T12:00:00+02:00')).toBe('2026-12-03 10:00 UTC');
  });
  it('writes a dash for a missing or unreadable date', () => {
    expect(formatDate(null)).toBe('—');
    expect(formatDate('not a date')).toBe('—');
    expect(formatDateTime(undefined)).toBe('—');
  });
});

describe('threshold lists', () => {
  it('summarises an even ladder instead of listing 50 numbers', () => {
    const ladder = Array.from({ length: 50 }, (_, i) => (i + 1) / 100);
    expect(formatThresholdList(ladder)).toBe('1% to 50% in steps of 1% (50 thresholds)');
  });
  it('lists uneven thresholds one by one', () => {
    expect(formatThresholdList([0.05, 0.1, 0.2, 0.3, 0.5])).toBe('5%, 10%, 20%, 30%, 50%');
    expect(formatThresholdList([0.1, 0.2])).toBe('10%, 20%');
    expect(formatThresholdList([])).toBe('none');
  });
});
