// One way to write numbers and dates for people, used by every page, the printed report and the server's texts:
// ISO dates (UTC), thousands separators, `p < 0.001`, and the same decimals for the same figure everywhere.
// Machine-readable output (CSV cells, JSON) keeps full precision and never goes through this module.

/** Decimals for each figure, wherever it is shown. */
export const FIGURE_DECIMALS = {
  auc: 3,
  calibrationIntercept: 3,
  calibrationSlope: 3,
  oe: 2,
  brier: 4,
  scaledBrier: 3,
  logLoss: 4,
  logLossTotal: 1,
  ici: 4,
  expected: 1,
  chiSquare: 2,
  z: 2,
  netBenefit: 4,
  /** risk thresholds and predicted risks given as fractions */
  risk: 3,
} as const;
export type Figure = keyof typeof FIGURE_DECIMALS;

type Maybe = number | null | undefined;

const formatters = new Map<number, Intl.NumberFormat>();
function numberFormat(decimals: number): Intl.NumberFormat {
  let nf = formatters.get(decimals);
  if (!nf) {
    // en-GB: comma thousands separator, point decimal, whatever the reader's locale (one way on every page).
    nf = new Intl.NumberFormat('en-GB', {
      minimumFractionDigits: decimals,
      maximumFractionDigits: decimals,
      useGrouping: true,
    });
    formatters.set(decimals, nf);
  }
  return nf;
}

const finite = (x: Maybe): x is number => typeof x === 'number' && Number.isFinite(x);

/** A number with thousands separators and a fixed number of decimals; '—' when there is no finite number. */
export function formatNumber(x: Maybe, decimals: number): string {
  if (!finite(x)) return '—';
  const s = numberFormat(decimals).format(x);
  return /^-[0.,]+$/.test(s) ? s.slice(1) : s; // -0.0001 at 3 decimals reads "0.000", not "-0.000"
}

/** A count of patients, rows, events…: thousands separators, no decimals. */
export function formatCount(n: Maybe): string {
  return formatNumber(n, 0);
}

/** A named figure with its own decimals (FIGURE_DECIMALS). */
export function formatFigure(figure: Figure, x: Maybe): string {
  return formatNumber(x, FIGURE_DECIMALS[figure]);
}

/** An estimate with its 95% CI; a missing or non-finite part shows as '—'. */
export interface Interval {
  estimate: number | null;
  lower: number | null;
  upper: number | null;
}

/** "0.812 (95% CI 0.790 to 0.834)": the words avoid a dash that reads as a minus next to negative bounds. */
export function formatEstimate(figure: Figure, e: Interval | null | undefined): string {
  if (!e) return '—';
  return `${formatFigure(figure, e.estimate)} (95% CI ${formatFigure(figure, e.lower)} to ${formatFigure(figure, e.upper)})`;
}

/** The short form for table cells, whose column heading says "95% CI": "0.812 (0.790 to 0.834)". */
export function formatEstimateShort(figure: Figure, e: Interval | null | undefined): string {
  if (!e) return '—';
  return `${formatFigure(figure, e.estimate)} (${formatFigure(figure, e.lower)} to ${formatFigure(figure, e.upper)})`;
}

/** A fraction as a percentage: 0.1234 → "12.3%". */
export function formatPercent(fraction: Maybe, decimals = 1): string {
  return finite(fraction) ? `${formatNumber(fraction * 100, decimals)}%` : '—';
}

/** A p-value as written in the trade: "p < 0.001" below a thousandth, otherwise "p = 0.034". */
export function formatPValue(p: Maybe): string {
  if (!finite(p)) return 'p not available';
  if (p < 0.001) return 'p < 0.001';
  if (p > 0.999) return 'p > 0.999';
  return `p = ${formatNumber(p, 3)}`;
}

function toDate(value: string | Date | null | undefined): Date | null {
  if (value === null || value === undefined || value === '') return null;
  const d = value instanceof Date ? value : new Date(value);
  return Number.isNaN(d.getTime()) ? null : d;
}

/** An ISO calendar date (UTC): "2026-03-31". A plain 'YYYY-MM-DD' string is returned as it is (no time zone shift). */
export function formatDate(value: string | Date | null | undefined): string {
  if (typeof value === 'string' && /^\d{4}-\d{2}-\d{2}$/.test(value)) return value;
  const d = toDate(value);
  return d ? d.toISOString().slice(0, 10) : '—';
}

/** An ISO date and time to the minute, in UTC and saying so: "2026-03-31 14:05 UTC". */
export function formatDateTime(value: string | Date | null | undefined): string {
  const d = toDate(value);
  return d ? `${d.toISOString().slice(0, 10)} ${d.toISOString().slice(11, 16)} UTC` : '—';
}

/** The same with seconds, for signatures and audit entries where the order within a minute matters. */
export function formatTimestamp(value: string | Date | null | undefined): string {
  const d = toDate(value);
  return d ? `${d.toISOString().slice(0, 10)} ${d.toISOString().slice(11, 19)} UTC` : '—';
}

/**
 * A list of risk thresholds in words: an even ladder reads "1% to 50% in steps of 1% (50 thresholds)", anything
 * else lists each value ("5%, 10%, 20%").
 */
export function formatThresholdList(values: readonly number[]): string {
  if (!values.length) return 'none';
  const pct = (x: number) => formatPercentTrim(x);
  if (values.length >= 4) {
    const step = values[1] - values[0];
    const even = values.every((v, i) => i === 0 || Math.abs(v - values[i - 1] - step) < 1e-9);
    if (even)
      return `${pct(values[0])} to ${pct(values[values.length - 1])} in steps of ${pct(step)} (${formatCount(values.length)} thresholds)`;
  }
  return values.map(pct).join(', ');
}

/** A percentage with as few decimals as the value needs (up to 2): 0.05 → "5%", 0.125 → "12.5%". */
export function formatPercentTrim(fraction: number): string {
  const v = Math.round(fraction * 100 * 100) / 100;
  return `${new Intl.NumberFormat('en-GB', { maximumFractionDigits: 2 }).format(v)}%`;
}
