// Counts missing values while the upload check reads each accepted row (uploadCheck.ts): per column, per subgroup
// level, per period, and the combinations of predictors missing together, each with its rows and events. One pass,
// bounded memory (levels, periods and distinct combinations are capped), no database: the summary is stored with the
// cohort version and the page only reads it.
import type { MissingnessGroup, MissingnessPattern, MissingnessSummary } from '@shared/missingness';
import { MISSINGNESS_LIMITS } from '@shared/missingness';
import { comparePeriodLabels } from '@shared/periods';

/** Distinct combinations kept while counting; rows of later new combinations are only counted in the total. */
const MAX_TRACKED_PATTERNS = 5000;
/** Levels (and periods) kept while counting, per column. */
const MAX_TRACKED_LEVELS = 10_000;

class Group {
  rows = 0;
  events = 0;
  rowsWithGaps = 0;
  readonly missing: Float64Array;
  constructor(predictors: number) {
    this.missing = new Float64Array(predictors);
  }
  view(level: string | null): MissingnessGroup {
    return {
      level,
      rows: this.rows,
      events: this.events,
      rowsWithGaps: this.rowsWithGaps,
      missing: Array.from(this.missing),
    };
  }
}

/**
 * Groups by level. The row checks hand over canonical copies of repeating labels, so the first few levels are found by
 * comparing references in an array (no hashing per row); the rest go to a Map, both bounded together.
 */
class Levels {
  private readonly fewKeys: (string | null)[] = [];
  private readonly fewGroups: Group[] = [];
  private readonly more = new Map<string | null, Group>();
  constructor(private readonly predictors: number) {}
  get size(): number {
    return this.fewKeys.length + this.more.size;
  }
  /** The level's group, or null when too many levels are kept already. */
  get(level: string | null): Group | null {
    const keys = this.fewKeys;
    for (let i = 0; i < keys.length; i++) if (keys[i] === level) return this.fewGroups[i];
    let g = this.more.get(level);
    if (g !== undefined) return g;
    if (this.size >= MAX_TRACKED_LEVELS) return null;
    g = new Group(this.predictors);
    if (keys.length < 16) {
      keys.push(level);
      this.fewGroups.push(g);
    } else this.more.set(level, g);
    return g;
  }
  entries(): [string | null, Group][] {
    return [...this.fewKeys.map((k, i): [string | null, Group] => [k, this.fewGroups[i]]), ...this.more.entries()];
  }
}

export interface MissingnessColumns {
  /** The score's columns, in mapping order. */
  predictors: string[];
  gapsAllowed: string[];
  subgroups: string[];
  /** The period column's name as the column summary shows it, or null without one. */
  period: string | null;
}

export class MissingnessCounter {
  private rows = 0;
  private events = 0;
  private rowsWithGaps = 0;
  private eventsWithGaps = 0;
  private readonly predictorMissing: Float64Array;
  private readonly subgroupMissing: Float64Array;
  private periodMissing = 0;
  private readonly levels: Levels[];
  private readonly levelsDropped: Set<string>[];
  private readonly periods: Levels;
  private completeRows = 0;
  private completeEvents = 0;
  private readonly patterns = new Map<string, { rows: number; events: number }>();
  private untrackedRows = 0;
  private untrackedEvents = 0;

  constructor(private readonly columns: MissingnessColumns) {
    this.predictorMissing = new Float64Array(columns.predictors.length);
    this.subgroupMissing = new Float64Array(columns.subgroups.length);
    this.levels = columns.subgroups.map(() => new Levels(columns.predictors.length));
    this.levelsDropped = columns.subgroups.map(() => new Set());
    this.periods = new Levels(columns.predictors.length);
  }

  private static count(g: Group | null, gaps: ArrayLike<number>, y: number, withGaps: boolean) {
    if (!g) return;
    g.rows++;
    g.events += y;
    if (!withGaps) return;
    g.rowsWithGaps++;
    for (let k = 0; k < gaps.length; k++) if (gaps[k]) g.missing[k]++;
  }

  /**
   * One accepted row: `gaps[k]` is 1 when predictor k is missing; `subgroups[k]` the row's level of subgroup k (null:
   * not recorded); `period` its period label as uploaded (null: none); `y` its outcome.
   */
  add(gaps: ArrayLike<number>, subgroups: ArrayLike<string | null>, period: string | null, y: number): void {
    this.rows++;
    this.events += y;
    let key = '';
    for (let k = 0; k < gaps.length; k++)
      if (gaps[k]) {
        this.predictorMissing[k]++;
        key = key === '' ? String(k) : `${key},${k}`;
      }
    const withGaps = key !== '';
    if (withGaps) {
      this.rowsWithGaps++;
      this.eventsWithGaps += y;
      let p = this.patterns.get(key);
      if (p === undefined && this.patterns.size < MAX_TRACKED_PATTERNS) {
        p = { rows: 0, events: 0 };
        this.patterns.set(key, p);
      }
      if (p) {
        p.rows++;
        p.events += y;
      } else {
        this.untrackedRows++;
        this.untrackedEvents += y;
      }
    } else {
      // Most rows: counted apart, without a lookup.
      this.completeRows++;
      this.completeEvents += y;
    }
    for (let s = 0; s < this.levels.length; s++) {
      const level = subgroups[s];
      if (level === null) this.subgroupMissing[s]++;
      const g = this.levels[s].get(level);
      if (!g && level !== null) this.levelsDropped[s].add(level);
      MissingnessCounter.count(g, gaps, y, withGaps);
    }
    if (this.columns.period !== null) {
      if (period === null) this.periodMissing++;
      MissingnessCounter.count(this.periods.get(period), gaps, y, withGaps);
    }
  }

  summary(): MissingnessSummary {
    const { predictors, gapsAllowed, subgroups, period } = this.columns;
    const byRows = (a: { rows: number }, b: { rows: number }) => b.rows - a.rows;
    const counted: [string, { rows: number; events: number }][] = [...this.patterns.entries()];
    if (this.completeRows) counted.push(['', { rows: this.completeRows, events: this.completeEvents }]);
    const listed = counted
      .map(([key, c]): MissingnessPattern => ({
        missing: key === '' ? [] : key.split(',').map((k) => predictors[Number(k)]),
        rows: c.rows,
        events: c.events,
      }))
      // Most rows first; ties by fewer missing columns, then by name, so the order never depends on the file's order.
      .sort(
        (a, b) =>
          byRows(a, b) || a.missing.length - b.missing.length || a.missing.join().localeCompare(b.missing.join()),
      );
    const shown = listed.slice(0, MISSINGNESS_LIMITS.patterns);
    const rest = listed.slice(MISSINGNESS_LIMITS.patterns);
    const restRows = rest.reduce((s, p) => s + p.rows, 0) + this.untrackedRows;
    const otherPatterns =
      restRows > 0
        ? {
            patterns: rest.length + (this.untrackedRows > 0 ? 1 : 0),
            rows: restRows,
            events: rest.reduce((s, p) => s + p.events, 0) + this.untrackedEvents,
          }
        : null;
    const byLevel = (a: MissingnessGroup, b: MissingnessGroup) =>
      byRows(a, b) || (a.level === null ? 1 : b.level === null ? -1 : a.level.localeCompare(b.level));
    const inTimeOrder = (a: MissingnessGroup, b: MissingnessGroup) =>
      a.level === null ? 1 : b.level === null ? -1 : comparePeriodLabels(a.level, b.level);
    return {
      rows: this.rows,
      events: this.events,
      predictors,
      gapsAllowed,
      byColumn: [
        ...predictors.map((column, k) => ({ column, role: 'predictor' as const, missing: this.predictorMissing[k] })),
        ...subgroups.map((column, k) => ({ column, role: 'subgroup' as const, missing: this.subgroupMissing[k] })),
        ...(period !== null ? [{ column: period, role: 'period' as const, missing: this.periodMissing }] : []),
      ],
      rowsWithGaps: this.rowsWithGaps,
      eventsWithGaps: this.eventsWithGaps,
      bySubgroup: subgroups.map((subgroup, s) => {
        const all = [...this.levels[s].entries()].map(([level, g]) => g.view(level)).sort(byLevel);
        return {
          subgroup,
          levels: all.slice(0, MISSINGNESS_LIMITS.levels),
          otherLevels: Math.max(0, all.length - MISSINGNESS_LIMITS.levels) + this.levelsDropped[s].size,
        };
      }),
      byPeriod:
        period === null
          ? null
          : [...this.periods.entries()]
              .map(([level, g]) => g.view(level))
              .sort(inTimeOrder)
              .slice(0, MISSINGNESS_LIMITS.periods),
      patterns: shown,
      otherPatterns,
    };
  }
}
