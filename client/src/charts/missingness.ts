// The missing-values section of a cohort version's page as numbers: which predictors have gaps, each group's share
// missing per predictor (the charts), the rows of the tables and downloads, and the combinations missing together.
import type { MissingnessGroup, MissingnessSummary } from '@shared/missingness';
import { shareOf } from '@shared/missingness';
import type { ColumnSummary } from '@shared/cohorts';

/** Colours that stay apart for most colour vision (one per predictor with gaps, repeating after eight). */
export const GAP_COLOURS = ['#1f5f8b', '#b5542d', '#3d8b3d', '#8a5fb0', '#b38f00', '#2a9d9d', '#8c4a6b', '#555555'];

export const NOT_RECORDED = '(not recorded)';
export const NO_PERIOD = '(no period)';

const ROLE_WORDS = { predictor: 'predictor', subgroup: 'subgroup', period: 'period' } as const;

/** The predictors that miss at least one value, in the mapping's order (the charts draw one series each). */
export function gappyPredictors(s: MissingnessSummary): string[] {
  return s.byColumn.filter((c) => c.role === 'predictor' && c.missing > 0).map((c) => c.column);
}

/** One row per mapped column that can be empty: column, kind, may have gaps, missing, share of the rows. */
export function columnRows(s: MissingnessSummary): (string | number)[][] {
  return s.byColumn.map((c) => [
    c.column,
    ROLE_WORDS[c.role],
    c.role !== 'predictor' ? '—' : s.gapsAllowed.includes(c.column) ? 'yes' : 'no',
    c.missing,
    shareOf(c.missing, s.rows),
  ]);
}

/** Per-column figures of a version stored before missing values were summarised (only the column summary has them). */
export function columnRowsFromSummary(summary: Record<string, ColumnSummary>): (string | number)[][] {
  return Object.entries(summary).map(([name, c]) => [name, c.missing, shareOf(c.missing, c.n + c.missing)]);
}

export interface GroupView {
  labels: string[];
  /** Per predictor with gaps, its share missing in each group (null: the group has no rows). */
  series: { predictor: string; shares: (number | null)[] }[];
  /** Group, patients, patients with a gap, then each predictor's missing count. */
  columns: string[];
  rows: (string | number)[][];
}

/** Shares missing per predictor in each group (subgroup levels or periods), and the table beside the chart. */
export function groupView(s: MissingnessSummary, groups: MissingnessGroup[], missingLabel: string): GroupView {
  const shown = gappyPredictors(s);
  const at = shown.map((p) => s.predictors.indexOf(p));
  const labels = groups.map((g) => g.level ?? missingLabel);
  return {
    labels,
    series: shown.map((predictor, k) => ({
      predictor,
      shares: groups.map((g) => (g.rows > 0 ? shareOf(g.missing[at[k]], g.rows) : null)),
    })),
    columns: ['group', 'patients', 'patients_with_a_gap', ...shown.map((p) => `${p}_missing`)],
    rows: groups.map((g, i) => [labels[i], g.rows, g.rowsWithGaps, ...at.map((k) => g.missing[k])]),
  };
}

export interface PatternRow {
  /** Per predictor with gaps, whether this combination misses it. */
  missing: boolean[];
  label: string;
  rows: number;
  share: number;
  /** Outcome rate among these patients, null when there are none. */
  eventRate: number | null;
}

/** The combinations of predictors missing together, most patients first, with the rest in one last row. */
export function patternRows(s: MissingnessSummary): PatternRow[] {
  const shown = gappyPredictors(s);
  const out: PatternRow[] = s.patterns.map((p) => ({
    missing: shown.map((c) => p.missing.includes(c)),
    label: p.missing.length ? p.missing.join(' + ') : 'none missing',
    rows: p.rows,
    share: shareOf(p.rows, s.rows),
    eventRate: p.rows ? p.events / p.rows : null,
  }));
  if (s.otherPatterns)
    out.push({
      missing: shown.map(() => false),
      label: `${s.otherPatterns.patterns} other combinations`,
      rows: s.otherPatterns.rows,
      share: shareOf(s.otherPatterns.rows, s.rows),
      eventRate: s.otherPatterns.rows ? s.otherPatterns.events / s.otherPatterns.rows : null,
    });
  return out;
}

/** Outcome rates of the patients with a gap and of the others: what tells whether gaps go with the outcome. */
export function outcomeByGaps(s: MissingnessSummary): { withGaps: number | null; complete: number | null } {
  const complete = s.rows - s.rowsWithGaps;
  return {
    withGaps: s.rowsWithGaps ? s.eventsWithGaps / s.rowsWithGaps : null,
    complete: complete ? (s.events - s.eventsWithGaps) / complete : null,
  };
}
