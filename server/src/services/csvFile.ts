// Reading an uploaded CSV from disk: encoding and delimiter checks, header and sample, streamed records.
import { createReadStream } from 'node:fs';
import { open, stat } from 'node:fs/promises';
import { parse, type Parser } from 'csv-parse';
import { HttpError } from '../middleware/errors';

export type Delimiter = ',' | ';';

const unprocessable = (message: string) => new HttpError(422, message);

/** Checks the first bytes: not empty, UTF-8 text without NUL bytes, comma or semicolon separated. */
export async function sniffCsv(path: string): Promise<{ delimiter: Delimiter; bytes: number }> {
  const { size } = await stat(path);
  if (size === 0) throw unprocessable('the file is empty');
  const fh = await open(path, 'r');
  const buf = Buffer.alloc(Math.min(size, 64 * 1024));
  try {
    await fh.read(buf, 0, buf.length, 0);
  } finally {
    await fh.close();
  }
  if (buf.includes(0)) throw new HttpError(415, 'the file is not text: it contains NUL bytes (is it a spreadsheet or a compressed file? export it as CSV, UTF-8)');
  // Cut at the last newline so a multi-byte character split by the 64 kB window is not blamed.
  const cut = buf.length < size ? buf.lastIndexOf(0x0a) : buf.length;
  let text: string;
  try {
    text = new TextDecoder('utf-8', { fatal: true }).decode(buf.subarray(0, cut > 0 ? cut : buf.length));
  } catch {
    throw new HttpError(415, 'the file is not valid UTF-8 text; export it as CSV with UTF-8 encoding');
  }
  text = text.replace(/^\uFEFF/, '');
  if (text.trim() === '') throw unprocessable('the file is empty');
  const controls = (text.match(/[\u0001-\u0008\u000e-\u001f]/g) ?? []).length;
  if (controls > 0) throw new HttpError(415, 'the file contains binary control characters; it does not look like a CSV');
  const header = firstRecordLine(text);
  const commas = countOutsideQuotes(header, ',');
  const semis = countOutsideQuotes(header, ';');
  if (commas === 0 && semis === 0) {
    const tabs = countOutsideQuotes(header, '\t');
    throw unprocessable(
      tabs > 0
        ? 'the header is separated by tabs; Plumbline reads comma- or semicolon-separated files'
        : 'the header has a single column: no comma or semicolon found; Plumbline reads comma- or semicolon-separated files',
    );
  }
  return { delimiter: semis > commas ? ';' : ',', bytes: size };
}

function firstRecordLine(text: string): string {
  let inQuotes = false;
  for (let i = 0; i < text.length; i++) {
    const c = text[i];
    if (c === '"') inQuotes = !inQuotes;
    else if ((c === '\n' || c === '\r') && !inQuotes) return text.slice(0, i);
  }
  return text;
}

function countOutsideQuotes(line: string, ch: string): number {
  let n = 0;
  let inQuotes = false;
  for (const c of line) {
    if (c === '"') inQuotes = !inQuotes;
    else if (c === ch && !inQuotes) n++;
  }
  return n;
}

/** A csv-parse stream over the file: BOM stripped, quoted fields, ragged rows kept for the row checks. */
export function csvStream(path: string, delimiter: Delimiter, onBytes?: (bytesRead: number) => void): Parser {
  const input = createReadStream(path, { highWaterMark: 1024 * 1024 });
  if (onBytes) input.on('data', () => onBytes(input.bytesRead));
  const parser = parse({
    bom: true,
    delimiter,
    relax_column_count: true,
    relax_quotes: true,
    // Empty lines come through as [''] and line numbers are counted by the caller: csv-parse's info option halves throughput.
    skip_empty_lines: false,
  });
  input.on('error', (err) => parser.destroy(err));
  return input.pipe(parser);
}

/** Counts the physical lines a record spanned (quoted fields may hold line breaks). */
export function extraLines(record: string[]): number {
  let n = 0;
  for (let i = 0; i < record.length; i++) {
    const f = record[i];
    if (f.length > 0 && f.indexOf('\n') !== -1) for (let j = 0; j < f.length; j++) if (f.charCodeAt(j) === 10) n++;
  }
  return n;
}

export const isEmptyRecord = (r: string[]) => r.length === 1 && r[0] === '';

/** The records of a file without quotes and lone CRs: each line split on the delimiter (as csv-parse reads such files). */
async function* plainRecords(path: string, delimiter: Delimiter): AsyncGenerator<string[]> {
  for await (const bytes of plainByteChunks(path)) {
    const text = bytes.toString('utf8');
    let pos = 0;
    while (pos < text.length) {
      const nl = text.indexOf('\n', pos);
      const stop = nl === -1 ? text.length : nl;
      yield text.slice(pos, stop > pos && text.charCodeAt(stop - 1) === 13 ? stop - 1 : stop).split(delimiter);
      pos = stop + 1;
    }
  }
}

/**
 * The header and the first rows, for the screen and the suggested mapping. `plain` (known from receiving the file: no
 * quote, no lone CR) lets the lines be split directly, which gives the same records as csv-parse, faster.
 */
export async function readHeaderAndSample(path: string, delimiter: Delimiter, maxRows = 5000, plain = false): Promise<{ headers: string[]; sample: string[][] }> {
  const parser = plain ? null : csvStream(path, delimiter);
  const records = plain ? plainRecords(path, delimiter) : (parser as AsyncIterable<string[]>);
  let headers: string[] | null = null;
  const sample: string[][] = [];
  try {
    for await (const record of records) {
      if (isEmptyRecord(record)) continue;
      if (!headers) headers = record.map((h) => h.trim());
      else sample.push(record);
      if (sample.length >= maxRows) break;
    }
  } catch (err) {
    throw unprocessable(`the file could not be read as CSV: ${(err as Error).message.split('\n')[0]}`);
  } finally {
    parser?.destroy();
  }
  if (!headers) throw unprocessable('the file is empty');
  if (headers.some((h) => h === '')) throw unprocessable(`the header has an empty column name (column ${headers.indexOf('') + 1})`);
  const dup = headers.find((h, i) => headers!.indexOf(h) !== i);
  if (dup !== undefined) throw unprocessable(`the header names column "${dup}" twice`);
  if (sample.length === 0) throw unprocessable('the file has a header but no data rows');
  return { headers, sample };
}

/** True when the file has no double quote and no bare carriage return: every record is one line split on the delimiter. */
export async function isPlainCsv(path: string): Promise<boolean> {
  for await (const chunk of createReadStream(path, { highWaterMark: 4 * 1024 * 1024 }) as AsyncIterable<Buffer>) {
    if (chunk.indexOf(0x22) !== -1) return false;
    for (let i = chunk.indexOf(0x0d); i !== -1; i = chunk.indexOf(0x0d, i + 1)) if (i + 1 >= chunk.length || chunk[i + 1] !== 0x0a) return false;
  }
  return true;
}

/**
 * The records of a file through csv-parse in batches, for the full pass over files with quotes (files without them
 * are read by plainByteChunks): quoting rules are the same as in the screen.
 */
export async function* csvBatches(path: string, delimiter: Delimiter, onBytes?: (bytesRead: number) => void): AsyncGenerator<string[][]> {
  const parser = csvStream(path, delimiter, onBytes);
  let batch: string[][] = [];
  try {
    for await (const record of parser as AsyncIterable<string[]>) {
      batch.push(record);
      if (batch.length >= 2048) { yield batch; batch = []; }
    }
    if (batch.length) yield batch;
  } finally {
    parser.destroy();
  }
}

/**
 * The bytes of a file without quotes in pieces of whole lines (BOM stripped; the last line may lack its newline). The
 * read buffers are passed on as views; only a line cut by a read boundary is copied.
 */
export async function* plainByteChunks(path: string, onBytes?: (bytesRead: number) => void): AsyncGenerator<Buffer> {
  const input = createReadStream(path, { highWaterMark: 1024 * 1024 });
  let rest: Buffer | null = null;
  let first = true;
  const bom = (b: Buffer) => (b.length >= 3 && b[0] === 0xef && b[1] === 0xbb && b[2] === 0xbf ? b.subarray(3) : b);
  try {
    for await (const chunk of input as AsyncIterable<Buffer>) {
      let bytes: Buffer = chunk;
      let from = 0;
      if (rest) {
        const nl = bytes.indexOf(0x0a);
        if (nl === -1) { rest = Buffer.concat([rest, bytes]); continue; }
        let joined: Buffer = Buffer.concat([rest, bytes.subarray(0, nl + 1)]);
        if (first) { first = false; joined = bom(joined); }
        rest = null;
        yield joined;
        from = nl + 1;
      } else if (first) {
        if (bytes.length < 3) { rest = bytes; continue; }
        first = false;
        bytes = bom(bytes);
      }
      const last = bytes.lastIndexOf(0x0a);
      onBytes?.(input.bytesRead);
      if (last < from) { rest = from < bytes.length ? bytes.subarray(from) : null; continue; }
      yield bytes.subarray(from, last + 1);
      rest = last + 1 < bytes.length ? bytes.subarray(last + 1) : null;
    }
    if (rest) yield first ? bom(rest) : rest;
  } finally {
    input.destroy();
  }
}
