// Loads one stored cohort version as column arrays for the engine (runs, drift, recalibration): its blocks in order
// (domain/cohorts/cohortBlocks.ts), concatenated column by column.
import { dataSource } from '../../platform/database/dataSource';
import { notFound } from '../errors';
import { parseStoredBlock, SELECT_BLOCKS_SQL, type StoredBlock } from './cohortBlocks';

export interface CohortData {
  cohortVersionId: string;
  n: number;
  outcome: Uint8Array;
  lineNo: Int32Array;
  columns: Record<string, (number | string | null)[]>;
  eventDate: (string | null)[];
  subgroups: Record<string, (string | null)[]>;
}

/** A parameterised query returning rows: TypeORM's dataSource.query, or a pg client's in a worker thread. */
export type Query = (sql: string, params?: unknown[]) => Promise<Record<string, unknown>[]>;

export const mainQuery: Query = (sql, params) => dataSource.query(sql, params);

export async function loadCohortData(cohortVersionId: string, query: Query = mainQuery): Promise<CohortData> {
  const meta = await query('SELECT row_count FROM cohort_versions WHERE id = $1', [cohortVersionId]);
  if (!meta.length) throw notFound('cohort version');
  const rows = await query(SELECT_BLOCKS_SQL, [cohortVersionId]);
  const blocks: StoredBlock[] = rows.map(parseStoredBlock);
  const n = blocks.reduce((s, b) => s + b.row_count, 0);
  const outcome = new Uint8Array(n);
  const lineNo = new Int32Array(n);
  const eventDate: (string | null)[] = new Array(n);
  const columns: Record<string, (number | string | null)[]> = {};
  const subgroups: Record<string, (string | null)[]> = {};
  let at = 0;
  for (const b of blocks) {
    const m = b.row_count;
    for (let i = 0; i < m; i++) {
      outcome[at + i] = b.outcome[i];
      lineNo[at + i] = b.line_no[i];
      eventDate[at + i] = b.event_date[i];
    }
    const spread = <T>(names: string[], values: T[], into: Record<string, T[]>) => {
      names.forEach((name, k) => {
        const col = (into[name] ??= new Array(n).fill(null));
        for (let i = 0; i < m; i++) col[at + i] = values[k * m + i];
      });
    };
    spread(b.num_names, b.num_values as (number | string | null)[], columns);
    spread(b.cat_names, b.cat_values as (number | string | null)[], columns);
    spread(b.sub_names, b.sub_values, subgroups);
    at += m;
  }
  return { cohortVersionId, n, outcome, lineNo, columns, eventDate, subgroups };
}

/** The column names a stored version holds, from its first block (no rows are read). */
export async function cohortColumnNames(
  cohortVersionId: string,
  m: { query: (q: string, p: unknown[]) => Promise<unknown> } = dataSource,
) {
  const rows = (await m.query(
    `SELECT num_names, cat_names, sub_names, EXISTS (SELECT 1 FROM cohort_row_blocks d WHERE d.cohort_version_id = $1 AND d.dated_count > 0) AS dated
     FROM cohort_row_blocks WHERE cohort_version_id = $1 ORDER BY block_no LIMIT 1`,
    [cohortVersionId],
  )) as { num_names: string[]; cat_names: string[]; sub_names: string[]; dated: boolean }[];
  const r = rows[0];
  return {
    predictors: r ? [...r.num_names, ...r.cat_names] : [],
    subgroups: r ? r.sub_names : [],
    hasDates: r?.dated ?? false,
  };
}
