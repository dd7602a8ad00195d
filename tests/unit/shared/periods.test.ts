// Period arithmetic: an uploaded period label is a closed range of calendar days.
import { describe, expect, it } from 'vitest';
import {
  comparePeriodLabels,
  daysInMonth,
  formatPeriodRange,
  parsePeriod,
  periodCovering,
  periodLabel,
  periodStartingOn,
  wholeMonths,
} from '@shared/periods';

describe('parsePeriod', () => {
  it.each([
    ['2026-01', 'month', '2026-01-01', '2026-01-31', '2026-01'],
    ['2026-04', 'month', '2026-04-01', '2026-04-30', '2026-04'],
    ['2026-12', 'month', '2026-12-01', '2026-12-31', '2026-12'],
    ['2026-Q1', 'quarter', '2026-01-01', '2026-03-31', '2026-Q1'],
    ['2026-Q2', 'quarter', '2026-04-01', '2026-06-30', '2026-Q2'],
    ['2026q3', 'quarter', '2026-07-01', '2026-09-30', '2026-Q3'],
    ['2026-Q4', 'quarter', '2026-10-01', '2026-12-31', '2026-Q4'],
    ['2026-H1', 'half', '2026-01-01', '2026-06-30', '2026-H1'],
    ['2026h2', 'half', '2026-07-01', '2026-12-31', '2026-H2'],
    ['2026', 'year', '2026-01-01', '2026-12-31', '2026'],
    [' 2025-Q4 ', 'quarter', '2025-10-01', '2025-12-31', '2025-Q4'],
  ])('%s is a %s from %s to %s', (raw, kind, start, end, label) => {
    expect(parsePeriod(raw)).toEqual({ kind, start, end, label });
  });

  it('knows February in leap years (divisible by 4, not by 100 unless by 400)', () => {
    expect(parsePeriod('2024-02')!.end).toBe('2024-02-29');
    expect(parsePeriod('2026-02')!.end).toBe('2026-02-28');
    expect(parsePeriod('2000-02')!.end).toBe('2000-02-29');
    expect(parsePeriod('2100-02')!.end).toBe('2100-02-28');
    expect(parsePeriod('2024-Q1')!.end).toBe('2024-03-31');
    expect(daysInMonth(2028, 2)).toBe(29);
  });

  it.each(['2026-13', '2026-00', '2026-Q5', '2026-Q0', '2026-H3', '2026-03-14', '26-Q1', 'March', '', '2026-W14'])(
    'refuses %j',
    (raw) => {
      expect(parsePeriod(raw)).toBeNull();
    },
  );
});

describe('stored starts and cohort ranges', () => {
  it('turns a stored first day back into the uploaded label', () => {
    expect(periodLabel('2026-04-01', 'quarter')).toBe('2026-Q2');
    expect(periodLabel('2026-07-01', 'half')).toBe('2026-H2');
    expect(periodLabel('2026-04-01', 'month')).toBe('2026-04');
    expect(periodLabel('2026-01-01', 'year')).toBe('2026');
    // A kind that does not fit the day, or no kind: the day itself.
    expect(periodLabel('2026-05-01', 'quarter')).toBe('2026-05-01');
    expect(periodLabel('2026-04-01', null)).toBe('2026-04-01');
    expect(periodLabel(null, 'quarter')).toBeNull();
    expect(periodStartingOn('2026-04-15', 'month')).toBeNull();
  });

  it('names the one period a range covers exactly, and nothing else', () => {
    expect(periodCovering('2026-04-01', '2026-06-30')?.label).toBe('2026-Q2');
    expect(periodCovering('2026-01-01', '2026-06-30')?.label).toBe('2026-H1');
    expect(periodCovering('2026-01-01', '2026-01-31')?.label).toBe('2026-01');
    expect(periodCovering('2026-01-01', '2026-12-31')?.label).toBe('2026');
    expect(periodCovering('2026-02-01', '2026-04-30')).toBeNull();
    expect(periodCovering('2026-01-01', '2026-04-30')).toBeNull();
    expect(periodCovering('2026-04-01', null)).toBeNull();
  });

  it('counts whole months across a year end', () => {
    expect(wholeMonths('2025-10-01', '2026-03-31')).toBe(6);
    expect(wholeMonths('2026-01-01', '2026-03-31')).toBe(3);
    expect(wholeMonths('2024-02-01', '2024-02-29')).toBe(1);
    expect(wholeMonths('2024-02-01', '2024-02-28')).toBeNull();
    expect(wholeMonths('2026-03-01', '2026-01-31')).toBeNull();
  });

  it('reads a range as dates from first to last day', () => {
    expect(formatPeriodRange('2026-01-01', '2026-06-30')).toBe('2026-01-01 to 2026-06-30');
    expect(formatPeriodRange(null, null)).toBe('period not recorded');
  });

  it('orders labels forwards in time, across kinds and year ends', () => {
    const labels = ['2026-Q2', '2026-H1', '2025-12', '2026', '2026-Q1', '2025-Q4', '2026-01'];
    expect([...labels].sort(comparePeriodLabels)).toEqual([
      '2025-Q4',
      '2025-12',
      '2026-01',
      '2026-Q1',
      '2026-H1',
      '2026',
      '2026-Q2',
    ]);
  });
});
