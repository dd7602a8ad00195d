// The periods of a risk-adjusted CUSUM: where each period's patients begin on the patient axis, and the signals that
// fall in each, so a chart of 20,000 patients can mark its period boundaries and be read one period at a time.

export interface CusumPeriodInput {
  label: string;
  periodStart: string | null;
  n: number;
}
export interface CusumPeriodSpan {
  label: string;
  /** First and last patient index of the period on the CUSUM's axis. */
  from: number;
  to: number;
  deterioration: { index: number; date: string | null }[];
  improvement: { index: number; date: string | null }[];
}

/**
 * Periods in date order with their patient ranges. A period starts at the first patient dated on or after its start
 * (the CUSUM is in event-date order); periods without a start date are laid end to end by their patient counts.
 */
export function cusumPeriodSpans(
  periods: readonly CusumPeriodInput[],
  points: readonly { index: number; date: string | null }[],
  signals: {
    deterioration: readonly { index: number; date: string | null }[];
    improvement: readonly { index: number; date: string | null }[];
  },
): CusumPeriodSpan[] {
  if (!periods.length || !points.length) return [];
  const firstIndex = points[0].index;
  const lastIndex = points[points.length - 1].index;
  const dated = periods.every((p) => p.periodStart);
  const ordered = dated ? [...periods].sort((a, b) => a.periodStart!.localeCompare(b.periodStart!)) : [...periods];
  const starts: number[] = [];
  let running = firstIndex;
  for (const p of ordered) {
    if (dated) {
      const at = points.find((q) => q.date !== null && q.date >= p.periodStart!);
      starts.push(at ? at.index : lastIndex + 1);
    } else {
      starts.push(running);
      running += p.n;
    }
  }
  starts[0] = Math.min(starts[0], firstIndex);
  return ordered
    .map((p, i) => {
      const from = starts[i];
      const to = i + 1 < starts.length ? starts[i + 1] - 1 : lastIndex;
      const inside = (s: { index: number }) => s.index >= from && s.index <= to;
      return {
        label: p.label,
        from,
        to,
        deterioration: signals.deterioration.filter(inside),
        improvement: signals.improvement.filter(inside),
      };
    })
    .filter((s) => s.to >= s.from);
}
