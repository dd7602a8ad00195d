// The rejected rows of a checked upload as a CSV the steward can fix and upload again: one record per rejected line,
// its reasons, and the values of the mapped columns only (read back from the upload's own temp file, which the
// screen has already passed; unmapped columns and the text of rows with the wrong number of fields are never sent).
import type { ColumnMappingSpec } from '@shared/cohorts';
import { csvRecords } from '@shared/csv';
import { dataSource } from '../../platform/database/dataSource';
import { cellsOnLinesInPool } from '../../jobs/threads/pool';
import type { Delimiter } from './csvFile';

/** The file columns a mapping reads, in the file's order (the only columns a download may carry). */
export function mappedColumns(headers: string[], mapping: ColumnMappingSpec): string[] {
  const used = new Set<string>([
    ...Object.values(mapping.predictors),
    mapping.outcome.column,
    ...(mapping.date ? [mapping.date.column] : []),
    ...Object.values(mapping.subgroups),
  ]);
  return headers.filter((h) => used.has(h));
}

interface Rejected {
  reasons: string[];
  /** A row with the wrong number of fields: its text is never sent. */
  ragged: boolean;
  values: string[] | null;
}

/** Rejected lines (the stored rejections, at most MAX_STORED_REJECTIONS cells), with their reasons joined per line. */
async function rejectedLines(uploadId: string): Promise<Map<number, Rejected>> {
  const rows: { line: number; column: string; reason: string }[] = await dataSource.query(
    'SELECT line_no AS line, column_name AS column, reason FROM cohort_upload_rejections WHERE upload_id = $1 ORDER BY line_no, column_name',
    [uploadId],
  );
  const out = new Map<number, Rejected>();
  for (const r of rows) {
    const e = out.get(r.line) ?? { reasons: [], ragged: false, values: null };
    e.reasons.push(r.column === '(row)' ? r.reason : `${r.column}: ${r.reason}`);
    if (r.column === '(row)') e.ragged = true;
    out.set(r.line, e);
  }
  return out;
}

export interface RejectedRowsSource {
  uploadId: string;
  tempPath: string | null;
  delimiter: Delimiter;
  headers: string[];
  mapping: ColumnMappingSpec | null;
}

/** The CSV: `line`, `reason`, then the mapped columns under their file names, so the fixed rows map the same way. */
export async function* rejectedRowsCsv(src: RejectedRowsSource): AsyncGenerator<string> {
  const columns = src.mapping ? mappedColumns(src.headers, src.mapping) : [];
  yield csvRecords([['line', 'reason', ...columns]]);
  const lines = await rejectedLines(src.uploadId);
  if (!lines.size) return;
  if (src.tempPath && columns.length) {
    // The file is read in a worker thread, not on the API thread; ragged rows' text is never asked for.
    const wanted = [...lines.entries()].filter(([, e]) => !e.ragged).map(([line]) => line);
    try {
      const cells = await cellsOnLinesInPool({
        path: src.tempPath,
        delimiter: src.delimiter,
        fields: src.headers.length,
        columns: columns.map((c) => src.headers.indexOf(c)),
        lines: wanted,
      });
      for (const [line, values] of cells) lines.get(line)!.values = values;
    } catch {
      // The temp file went (discarded meanwhile) or cannot be read: the lines and reasons are still sent.
    }
  }
  const out: (string | number)[][] = [];
  for (const [line, e] of [...lines.entries()].sort((a, b) => a[0] - b[0])) {
    out.push([line, e.reasons.join('; '), ...(e.values ?? columns.map(() => ''))]);
    if (out.length === 5000) yield csvRecords(out.splice(0));
  }
  if (out.length) yield csvRecords(out);
}

/** The distinct rejected line numbers of an upload (for a commit that excludes chosen rows). */
export async function rejectedLineNumbers(uploadId: string): Promise<number[]> {
  const rows: { line: number }[] = await dataSource.query(
    'SELECT DISTINCT line_no AS line FROM cohort_upload_rejections WHERE upload_id = $1 ORDER BY line_no',
    [uploadId],
  );
  return rows.map((r) => r.line);
}
