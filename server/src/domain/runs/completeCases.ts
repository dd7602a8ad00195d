// The rows a run without multiple imputation analyses: those with every column the score reads recorded (a complete-case
// analysis). A gap is never read as 0 or as "not the level": the row is left out and counted, per column.
import type { CohortData } from '../cohorts/cohortData';
import type { RunScoreInput } from './runCompute';

export interface CompleteCases {
  data: CohortData;
  /** Rows left out (a column the score reads is missing). */
  leftOut: number;
  /** Per column the score reads, how many rows miss it (a row may miss several). */
  missingByColumn: Record<string, number>;
}

/** The columns a score reads from a cohort: its formula's predictors, or the supplied probability. */
export function scoreColumns(score: RunScoreInput): string[] {
  if (score.mode === 'formula') return [...new Set((score.model?.predictors ?? []).map((p) => p.column))];
  return score.probabilityColumn ? [score.probabilityColumn] : [];
}

/** The complete cases of `data` for `score`; the same object when nothing is missing. */
export function completeCases(score: RunScoreInput, data: CohortData): CompleteCases {
  const names = scoreColumns(score).filter((c) => data.columns[c]);
  const missingByColumn: Record<string, number> = {};
  const keep = new Uint8Array(data.n).fill(1);
  let leftOut = 0;
  for (const c of names) {
    const col = data.columns[c];
    let missing = 0;
    for (let i = 0; i < data.n; i++)
      if (col[i] === null) {
        missing++;
        if (keep[i]) {
          keep[i] = 0;
          leftOut++;
        }
      }
    if (missing) missingByColumn[c] = missing;
  }
  if (leftOut === 0) return { data, leftOut, missingByColumn };
  const rows: number[] = [];
  for (let i = 0; i < data.n; i++) if (keep[i]) rows.push(i);
  const pick = <T>(values: ArrayLike<T>): T[] => rows.map((i) => values[i]);
  const each = <T>(cols: Record<string, T[]>) =>
    Object.fromEntries(Object.entries(cols).map(([k, v]) => [k, pick(v)])) as Record<string, T[]>;
  return {
    data: {
      cohortVersionId: data.cohortVersionId,
      n: rows.length,
      outcome: Uint8Array.from(rows, (i) => data.outcome[i]),
      lineNo: Int32Array.from(rows, (i) => data.lineNo[i]),
      columns: each(data.columns),
      eventDate: pick(data.eventDate),
      subgroups: each(data.subgroups),
    },
    leftOut,
    missingByColumn,
  };
}
