// Loads one stored cohort version as column arrays for the engine (runs, drift, recalibration): one query, in line order.
import { dataSource } from '../db/dataSource';
import { notFound } from '../middleware/errors';

export interface CohortData {
  cohortVersionId: string;
  n: number;
  outcome: Uint8Array;
  lineNo: Int32Array;
  columns: Record<string, (number | string | null)[]>;
  eventDate: (string | null)[];
  subgroups: Record<string, (string | null)[]>;
}

export async function loadCohortData(cohortVersionId: string): Promise<CohortData> {
  const meta: { row_count: number; mapping: { predictors?: Record<string, string>; subgroups?: Record<string, string> } }[] = await dataSource.query(
    'SELECT row_count, mapping FROM cohort_versions WHERE id = $1',
    [cohortVersionId],
  );
  if (!meta.length) throw notFound('cohort version');
  const predictorKeys = Object.keys(meta[0].mapping.predictors ?? {});
  const subgroupKeys = Object.keys(meta[0].mapping.subgroups ?? {});
  // One row per patient with the jsonb kept as text: JSON.parse in Node is faster than pg's per-row jsonb parsing.
  const rows: { l: number; y: number; d: string | null; p: string; s: string }[] = await dataSource.query(
    `SELECT line_no AS l, outcome AS y, to_char(event_date, 'YYYY-MM-DD') AS d, predictors::text AS p, subgroups::text AS s
     FROM cohort_rows WHERE cohort_version_id = $1 ORDER BY line_no`,
    [cohortVersionId],
  );
  const n = rows.length;
  const outcome = new Uint8Array(n);
  const lineNo = new Int32Array(n);
  const eventDate: (string | null)[] = new Array(n);
  const columns: Record<string, (number | string | null)[]> = {};
  const subgroups: Record<string, (string | null)[]> = {};
  for (const k of predictorKeys) columns[k] = new Array(n).fill(null);
  for (const k of subgroupKeys) subgroups[k] = new Array(n).fill(null);
  for (let i = 0; i < n; i++) {
    const r = rows[i];
    outcome[i] = r.y;
    lineNo[i] = r.l;
    eventDate[i] = r.d;
    const p = JSON.parse(r.p) as Record<string, number | string>;
    for (const k in p) (columns[k] ??= new Array(n).fill(null))[i] = p[k];
    const s = JSON.parse(r.s) as Record<string, string>;
    for (const k in s) (subgroups[k] ??= new Array(n).fill(null))[i] = s[k];
  }
  return { cohortVersionId, n, outcome, lineNo, columns, eventDate, subgroups };
}
