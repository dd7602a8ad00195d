// One CSV writer for every export (cohort rejections, run results, audit trail).
// Quoting follows RFC 4180; cells a spreadsheet would read as a formula are neutralised (OWASP "CSV injection").

export type CsvCell = string | number | boolean | null | undefined | Date;

// Characters that make Excel, LibreOffice or Sheets start a formula or a DDE call (OWASP CSV Injection page).
const FORMULA_START = /^[=+\-@\t\r]/;

/** Neutralises a text cell that a spreadsheet would evaluate, by prefixing a single quote. */
export function neutraliseFormula(text: string): string {
  return FORMULA_START.test(text) ? `'${text}` : text;
}

/** One cell: numbers stay numbers (a negative number is data, not a formula); text is neutralised then quoted. */
export function csvCell(value: CsvCell): string {
  if (value === null || value === undefined) return '';
  if (typeof value === 'number') return Number.isFinite(value) ? String(value) : '';
  if (typeof value === 'boolean') return value ? 'true' : 'false';
  const text = neutraliseFormula(value instanceof Date ? value.toISOString() : value);
  // RFC 4180 §2.6–2.7: fields with comma, quote or line break are enclosed in quotes, quotes doubled.
  return /[",\r\n]/.test(text) || text !== text.trim() ? `"${text.replace(/"/g, '""')}"` : text;
}

export function csvLine(cells: readonly CsvCell[]): string {
  return cells.map(csvCell).join(',');
}

/** A whole document: header then rows, CRLF line ends as RFC 4180 §2.1 says, ending with a line break. */
export function toCsv(header: readonly string[], rows: Iterable<readonly CsvCell[]>): string {
  const lines = [csvLine(header)];
  for (const row of rows) lines.push(csvLine(row));
  return `${lines.join('\r\n')}\r\n`;
}

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
