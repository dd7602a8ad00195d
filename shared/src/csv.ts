// The one CSV writer of Plumbline: every CSV the server sends (rejected rows, run results, the audit trail) and every
// chart or table download of the client goes through here. csv-stringify quotes (RFC 4180); one neutraliser keeps a
// spreadsheet from running a cell as a formula (OWASP, "CSV Injection").
// The browser build: it carries its own Buffer, so the client's downloads can use it (lib/ expects Node's).
import { stringify } from 'csv-stringify/browser/esm/sync';

export type CsvCell = string | number | boolean | null | undefined | Date;

const PLAIN_NUMBER = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

/**
 * A cell a spreadsheet would run: it starts with a tab, CR or LF, or, once leading spaces are trimmed as a spreadsheet
 * or our own storage trims them, with =, +, -, @ and is not a plain number (a negative number is data).
 */
export function looksLikeFormula(text: string): boolean {
  if (text === '') return false;
  const c = text[0];
  if (c === '\t' || c === '\r' || c === '\n') return true;
  const v = c === ' ' ? text.trim() : text;
  const d = v[0];
  if (d !== '=' && d !== '+' && d !== '-' && d !== '@') return false;
  return !PLAIN_NUMBER.test(v.trim());
}

/** Prefixes a formula-looking text with an apostrophe, so a spreadsheet shows it as text. */
export function neutraliseFormula(text: string): string {
  return looksLikeFormula(text) ? `'${text}` : text;
}

/** One cell as text: numbers stay numbers, non-finite and missing are empty, dates ISO 8601, text neutralised. */
export function csvCellText(value: CsvCell): string {
  if (value === null || value === undefined) return '';
  if (typeof value === 'number') return Number.isFinite(value) ? String(value) : '';
  if (typeof value === 'boolean') return value ? 'true' : 'false';
  return neutraliseFormula(value instanceof Date ? value.toISOString() : value);
}

/** Records without a header, each ending in CRLF (RFC 4180 §2.1); for pages of a streamed download. */
export function csvRecords(rows: Iterable<readonly CsvCell[]>): string {
  const cells: string[][] = [];
  for (const row of rows) cells.push(row.map(csvCellText));
  if (!cells.length) return '';
  // csv-stringify quotes fields holding the separator, a quote or CRLF; a lone CR or LF and edge spaces are quoted too.
  return stringify(cells, { record_delimiter: 'windows', quoted_match: [/[\r\n]/, /^\s|\s$/], eof: true });
}

/** A whole document: header then rows, CRLF line ends, ending with a line break. */
export function toCsv(header: readonly string[], rows: Iterable<readonly CsvCell[]>): string {
  return csvRecords([header, ...rows]);
}
