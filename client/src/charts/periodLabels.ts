// One name per drift period, used by every chart, table and CSV of the drift page: the period the cohort version
// covers (2026-Q2), said in words when it is unlike the usual one (a half-year among quarters), after the cohort's own
// label when that differs. On an axis the two parts go on two lines so neighbouring periods do not overlap.
import type { DriftPeriod } from '@shared/drift';

const KIND_WORDS: Record<string, string> = { month: 'month', quarter: 'quarter', half: 'half-year', year: 'year' };
const SEPARATOR = ' · ';

type PeriodNaming = Pick<DriftPeriod, 'label' | 'period'>;

/** The kind of period most of the timeline's periods are (quarter, month…), or null when none is whole. */
function usualKind(periods: readonly PeriodNaming[]): string | null {
  const counts = new Map<string, number>();
  for (const p of periods) if (p.period.kind) counts.set(p.period.kind, (counts.get(p.period.kind) ?? 0) + 1);
  return [...counts.entries()].sort((a, b) => b[1] - a[1])[0]?.[0] ?? null;
}

/** What each period covers (2026-Q2, or "2026-H1 (half-year)" among quarters), in the order given. */
export function periodsCovered(periods: readonly PeriodNaming[]): string[] {
  const usual = usualKind(periods);
  return periods.map((p) => {
    const span = p.period.kind ? KIND_WORDS[p.period.kind] : p.period.months ? `${p.period.months} months` : null;
    const unusual = span && periods.length > 1 && p.period.kind !== usual;
    return unusual ? `${p.period.label} (${span})` : p.period.label;
  });
}

/** Each period's name: what it covers, after the cohort version's label when that says something else. */
export function periodLabels(periods: readonly PeriodNaming[]): string[] {
  const covered = periodsCovered(periods);
  return periods.map((p, i) => (p.label === p.period.label ? covered[i] : `${p.label}${SEPARATOR}${covered[i]}`));
}

/** A category-axis tick callback that puts a period name's parts on separate lines. */
export function periodTick(
  this: { getLabelForValue(value: number): string },
  value: string | number,
): string | string[] {
  const label = this.getLabelForValue(Number(value));
  return label.includes(SEPARATOR) ? label.split(SEPARATOR) : label;
}
