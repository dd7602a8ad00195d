// Which time grouping a cohort's own periods suggest, from the period values of its column summary: quarters when
// every period is a quarter (uploaded as YYYY-Qn, stored as the quarter's first day), months otherwise.

export type PeriodGrouping = 'month' | 'quarter';

/** 'quarter' for 2026-Q1 / 2026-04-01-style values that all start a quarter, 'month' for other dated values, null for none. */
export function periodGroupingOf(values: readonly string[]): PeriodGrouping | null {
  let seen = 0;
  let quarterly = true;
  for (const raw of values) {
    const v = raw.trim();
    if (/^\d{4}-?Q[1-4]$/i.test(v)) {
      seen++;
      continue;
    }
    const m = /^(\d{4})-(\d{2})(-\d{2})?$/.exec(v);
    if (!m) continue;
    seen++;
    // A stored period is the first day of its period: a month other than Jan, Apr, Jul, Oct cannot start a quarter.
    if (!['01', '04', '07', '10'].includes(m[2]) || m[3] !== '-01') quarterly = false;
  }
  if (!seen) return null;
  return quarterly ? 'quarter' : 'month';
}
