// CSV downloads the server sends (cohort rejections, run results, audit trail): the one writer in shared/src/csv.ts.
import { toCsv, type CsvCell } from '@shared/csv';

export { csvCellText, csvRecords, looksLikeFormula, neutraliseFormula, toCsv, type CsvCell } from '@shared/csv';

/** Sends a CSV download on an Express-like response. */
export function sendCsv(
  res: { setHeader(name: string, value: string): unknown; send(body: string): unknown },
  filename: string,
  header: readonly string[],
  rows: Iterable<readonly CsvCell[]>,
): void {
  res.setHeader('Content-Type', 'text/csv; charset=utf-8');
  res.setHeader('Content-Disposition', `attachment; filename="${filename.replace(/[^A-Za-z0-9._-]/g, '_')}"`);
  res.setHeader('X-Content-Type-Options', 'nosniff');
  res.send(toCsv(header, rows));
}
