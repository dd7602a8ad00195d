// Every drift chart, table and CSV names a period the same way, and an axis splits a long name over two lines.
import { describe, expect, it } from 'vitest';
import { periodLabels, periodsCovered, periodTick } from '../../client/src/charts/periodLabels';

const q = (label: string, covered = label, kind: 'quarter' | 'half' | null = 'quarter', months: number | null = 3) => ({
  label,
  period: { label: covered, kind, months },
});

describe('periodLabels', () => {
  it('names a period by what it covers, after the cohort label only when that says something else', () => {
    const periods = [q('2026-Q1'), q('Spring intake', '2026-Q2')];
    expect(periodLabels(periods)).toEqual(['2026-Q1', 'Spring intake · 2026-Q2']);
    expect(periodsCovered(periods)).toEqual(['2026-Q1', '2026-Q2']);
  });
  it('says what an unusual period covers (a half-year among quarters)', () => {
    const periods = [q('2025-Q3'), q('2025-Q4'), q('First half', '2026-H1', 'half', 6)];
    expect(periodsCovered(periods)).toEqual(['2025-Q3', '2025-Q4', '2026-H1 (half-year)']);
    expect(periodLabels(periods)[2]).toBe('First half · 2026-H1 (half-year)');
  });
  it('gives a range without a whole kind its months', () => {
    expect(
      periodsCovered([
        q('2026-Q1'),
        q('Odd', '2026-01-15 to 2026-03-20', null, null),
        q('Five', '2026-01 to 2026-05', null, 5),
      ]),
    ).toEqual(['2026-Q1', '2026-01-15 to 2026-03-20', '2026-01 to 2026-05 (5 months)']);
  });
  it('splits a two-part name over two tick lines and leaves a one-part name alone', () => {
    const names = ['2026-Q1', 'Spring intake · 2026-Q2'];
    const axis = { getLabelForValue: (v: number) => names[v] };
    expect(periodTick.call(axis, 0)).toBe('2026-Q1');
    expect(periodTick.call(axis, 1)).toEqual(['Spring intake', '2026-Q2']);
  });
});
