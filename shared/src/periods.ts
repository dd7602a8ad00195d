// Period arithmetic for the event-period column and cohort versions: an uploaded label (2026-03, 2026-Q2, 2026-H1,
// 2026) is a closed range of calendar days [start, end]; rows store the start, the cohort version the whole range.
// Dates are ISO 'YYYY-MM-DD' strings in the calendar (no time zone): worked out with UTC dates so no offset moves a day.

export const PERIOD_KINDS = ['month', 'quarter', 'half', 'year'] as const;
export type PeriodKind = (typeof PERIOD_KINDS)[number];

export interface Period {
  kind: PeriodKind;
  /** first day, YYYY-MM-DD */
  start: string;
  /** last day, YYYY-MM-DD */
  end: string;
  /** the canonical label: 2026-03, 2026-Q2, 2026-H1, 2026 */
  label: string;
}

const MONTHS: Record<PeriodKind, number> = { month: 1, quarter: 3, half: 6, year: 12 };
const pad = (n: number) => String(n).padStart(2, '0');
const iso = (y: number, m: number, d: number) => `${String(y).padStart(4, '0')}-${pad(m)}-${pad(d)}`;

/** Days in a month of the Gregorian calendar (month 1 … 12); February has 29 in leap years. */
export function daysInMonth(year: number, month: number): number {
  return new Date(Date.UTC(year, month, 0)).getUTCDate();
}

function build(kind: PeriodKind, year: number, firstMonth: number): Period {
  const lastMonth = firstMonth + MONTHS[kind] - 1;
  const label =
    kind === 'month'
      ? `${year}-${pad(firstMonth)}`
      : kind === 'quarter'
        ? `${year}-Q${(firstMonth + 2) / 3}`
        : kind === 'half'
          ? `${year}-H${firstMonth === 1 ? 1 : 2}`
          : String(year);
  return { kind, start: iso(year, firstMonth, 1), end: iso(year, lastMonth, daysInMonth(year, lastMonth)), label };
}

/** Reads a period cell: YYYY-MM, YYYY-Qn (or YYYYQn), YYYY-Hn (or YYYYHn), YYYY. Null when it is none of these. */
export function parsePeriod(raw: string): Period | null {
  const v = raw.trim();
  let m = /^(\d{4})-(0[1-9]|1[0-2])$/.exec(v);
  if (m) return build('month', Number(m[1]), Number(m[2]));
  m = /^(\d{4})-?Q([1-4])$/i.exec(v);
  if (m) return build('quarter', Number(m[1]), (Number(m[2]) - 1) * 3 + 1);
  m = /^(\d{4})-?H([12])$/i.exec(v);
  if (m) return build('half', Number(m[1]), m[2] === '1' ? 1 : 7);
  m = /^(\d{4})$/.exec(v);
  if (m) return build('year', Number(m[1]), 1);
  return null;
}

/** The period of this kind that starts on `start` (a stored row's period), or null when `start` does not begin one. */
export function periodStartingOn(start: string, kind: PeriodKind): Period | null {
  const m = /^(\d{4})-(\d{2})-01$/.exec(start);
  if (!m) return null;
  const month = Number(m[2]);
  if (month < 1 || month > 12 || (month - 1) % MONTHS[kind] !== 0) return null;
  return build(kind, Number(m[1]), month);
}

/** The label to show for a stored period start: the uploaded kind's label, or the date itself when the kind is unknown. */
export function periodLabel(start: string | null, kind: PeriodKind | null | undefined): string | null {
  if (!start) return null;
  return (kind && periodStartingOn(start, kind)?.label) || start;
}

/**
 * The label a stored row shows: the label uploaded for its start date when the version kept one per start (a file mixing
 * months and quarters), else the uploaded kind's label, else the date itself.
 */
export function rowPeriodLabel(
  start: string | null,
  kind: PeriodKind | null | undefined,
  labels: Record<string, string> | null | undefined,
): string | null {
  return (start && labels?.[start]) || periodLabel(start, kind);
}

/** The one period [start, end] covers exactly (2026-04-01 … 2026-06-30 is 2026-Q2), or null when it is no single period. */
export function periodCovering(start: string | null, end: string | null): Period | null {
  if (!start || !end) return null;
  for (const kind of PERIOD_KINDS) {
    const p = periodStartingOn(start, kind);
    if (p && p.end === end) return p;
  }
  return null;
}

/** How many whole months [start, end] spans when it runs from a first to a last day of a month, else null. */
export function wholeMonths(start: string | null, end: string | null): number | null {
  if (!start || !end) return null;
  const a = /^(\d{4})-(\d{2})-01$/.exec(start);
  const b = /^(\d{4})-(\d{2})-(\d{2})$/.exec(end);
  if (!a || !b || Number(b[3]) !== daysInMonth(Number(b[1]), Number(b[2]))) return null;
  const n = (Number(b[1]) - Number(a[1])) * 12 + Number(b[2]) - Number(a[2]) + 1;
  return n > 0 ? n : null;
}

/** A date range as people read it: "2026-01-01 to 2026-06-30". */
export function formatPeriodRange(start: string | null, end: string | null): string {
  if (!start && !end) return 'period not recorded';
  return `${start ?? '…'} to ${end ?? '…'}`;
}

/** Orders period labels by their start (then their length), so 2025-Q4 comes before 2026-01 and 2026-H1 after 2026-Q1. */
export function comparePeriodLabels(a: string, b: string): number {
  const pa = parsePeriod(a);
  const pb = parsePeriod(b);
  if (pa && pb)
    return pa.start < pb.start ? -1 : pa.start > pb.start ? 1 : pa.end < pb.end ? -1 : pa.end > pb.end ? 1 : 0;
  if (pa) return -1;
  if (pb) return 1;
  return a < b ? -1 : a > b ? 1 : 0;
}
