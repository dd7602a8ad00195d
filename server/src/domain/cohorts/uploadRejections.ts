// An upload's rejected rows: one page for the screen, or all of them as CSV with their mapped values.
import { dataSource } from '../../platform/database/dataSource';
import { rejectedRowsCsv } from './rejectedRows';
import { uploadRow } from './uploads';

// ---- Rejections ----------------------------------------------------------------------------------------------

export async function listRejections(id: string, page: number, pageSize: number) {
  const rows = await dataSource.query(
    `SELECT line_no AS line, column_name AS column, value, reason FROM cohort_upload_rejections WHERE upload_id = $1 ORDER BY line_no, column_name LIMIT $2 OFFSET $3`,
    [id, pageSize, (page - 1) * pageSize],
  );
  const [{ n }] = await dataSource.query(
    'SELECT count(*)::int AS n FROM cohort_upload_rejections WHERE upload_id = $1',
    [id],
  );
  return {
    rejections: rows as { line: number; column: string; value: string; reason: string }[],
    total: n as number,
    page,
    pageSize,
  };
}

/** The rejected rows as CSV with their mapped values (domain/cohorts/rejectedRows.ts), formula-looking cells neutralised. */
export async function* rejectionsCsv(id: string): AsyncGenerator<string> {
  const r = await uploadRow(id);
  yield* rejectedRowsCsv({
    uploadId: id,
    tempPath: r.tempPath,
    delimiter: r.delimiter,
    headers: r.headers,
    mapping: r.mapping,
  });
}
