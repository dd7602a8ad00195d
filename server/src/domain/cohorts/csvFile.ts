// The one CSV reader of Plumbline (the upload screen, the row checks and the command line): the file's bytes are
// decoded strictly as UTF-8 (a bad byte or a NUL anywhere refuses the file, naming the line) and split into records
// by papaparse (DEVELOPERS.md, "Reading CSV", says why this parser). Streaming: one piece of the file at a time.
import { isAscii, isUtf8 } from 'node:buffer';
import { createReadStream } from 'node:fs';
import { open, stat } from 'node:fs/promises';
import { Readable } from 'node:stream';
import Papa from 'papaparse';
import { DomainError, refused } from '../errors';

export type Delimiter = ',' | ';';

const unprocessable = (message: string) => refused(message);

/** Bytes that are not UTF-8 text: refuses the whole file, with the line where they were found. */
export class CsvBytesError extends DomainError {
  constructor(message: string) {
    super('not-text', message);
  }
}

// eslint-disable-next-line no-control-regex -- binary control characters are exactly what this check looks for
const CONTROL = /[\u0000-\u0008\u000e-\u001f]/;

function countNewlines(text: string, end = text.length): number {
  let n = 0;
  for (let i = text.indexOf('\n'); i !== -1 && i < end; i = text.indexOf('\n', i + 1)) n++;
  return n;
}

/**
 * The text of a file, piece by piece: BOM removed, strictly UTF-8; a NUL byte, another binary control character or
 * an invalid byte sequence anywhere throws CsvBytesError naming the line.
 */
export async function* csvText(
  path: string,
  onBytes?: (bytesRead: number) => void,
  onQuote?: () => void,
): AsyncGenerator<string> {
  // 64 KB pieces: the records papaparse makes of a piece then die young (1 MB pieces measured 4× the parse CPU, mostly in
  // the garbage collector copying and promoting each live batch).
  const input = createReadStream(path, { highWaterMark: 64 * 1024 });
  let line = 1;
  let first = true;
  // The bytes of a character that a piece of the file cut in two, carried to the next piece.
  let carry: Buffer | null = null;
  try {
    for await (const piece of input as AsyncIterable<Buffer>) {
      const chunk: Buffer = carry ? Buffer.concat([carry, piece]) : piece;
      const cut = completeCharacters(chunk);
      carry = cut < chunk.length ? chunk.subarray(cut) : null;
      const whole = chunk.subarray(0, cut);
      let text: string;
      // Node's own validators (simdutf): ASCII, the common case, is copied as Latin-1 without decoding.
      if (isAscii(whole)) text = whole.toString('latin1');
      else if (isUtf8(whole)) text = whole.toString('utf8');
      else {
        // The validator only says that bad bytes exist; a lenient decoding shows where (as U+FFFD).
        const lossy = whole.toString('utf8');
        const at = Math.max(0, lossy.indexOf('\uFFFD'));
        throw new CsvBytesError(
          `the file is not valid UTF-8 text (line ${line + countNewlines(lossy, at)}); export it as CSV with UTF-8 encoding`,
        );
      }
      if (first) {
        first = false;
        if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
      }
      const bad = CONTROL.exec(text);
      if (bad) {
        const what = bad[0] === '\0' ? 'a NUL byte' : 'a binary control character';
        throw new CsvBytesError(
          `the file is not text: it contains ${what} (line ${line + countNewlines(text, bad.index)}); is it a spreadsheet or a compressed file? export it as CSV, UTF-8`,
        );
      }
      line += countNewlines(text);
      if (onQuote && text.indexOf('"') !== -1) {
        onQuote();
        onQuote = undefined;
      }
      onBytes?.(input.bytesRead);
      if (text) yield text;
    }
    if (carry)
      throw new CsvBytesError(
        `the file is not valid UTF-8 text (it ends inside a character, line ${line}); export it as CSV with UTF-8 encoding`,
      );
  } finally {
    input.destroy();
  }
}

/** Where the last complete UTF-8 character of a piece ends (a lead byte whose continuation bytes are still to come starts the rest). */
function completeCharacters(b: Buffer): number {
  const n = b.length;
  for (let i = n - 1; i >= 0 && i >= n - 4; i--) {
    const c = b[i];
    if (c < 0x80) return n;
    if (c >= 0xc0) {
      const need = c >= 0xf0 ? 4 : c >= 0xe0 ? 3 : 2;
      return n - i < need ? i : n;
    }
  }
  return n;
}

/** A batch of records; `quoted` once a quote has been seen in the file (only then can a field hold a line break). */
export type CsvBatch = string[][] & { quoted?: boolean };

/**
 * The records of a file in batches (each a piece of the file, 64 KB), parsed by papaparse: quoted fields, ragged
 * rows kept for the row checks, empty lines as [''] (the caller counts line numbers). The file is read only as fast as
 * the batches are taken.
 */
export async function* csvBatches(
  path: string,
  delimiter?: Delimiter,
  onBytes?: (bytesRead: number) => void,
): AsyncGenerator<CsvBatch> {
  let quoted = false;
  // Object mode hands papaparse the decoded pieces as they are (a byte stream would encode each to UTF-8 and decode it again).
  const source = Readable.from(
    csvText(path, onBytes, () => (quoted = true)),
    { objectMode: true },
  );
  const batches: CsvBatch[] = [];
  let parser: Papa.Parser | null = null;
  let done = false;
  let failure: unknown = null;
  let wake: (() => void) | null = null;
  const signal = () => {
    const w = wake;
    wake = null;
    w?.();
  };
  source.on('error', (err) => {
    failure ??= err;
    done = true;
    signal();
  });
  Papa.parse<string[]>(source as unknown as Papa.LocalFile, {
    delimiter: delimiter ?? '',
    quoteChar: '"',
    skipEmptyLines: false,
    chunk(results, p) {
      parser = p;
      // Hold both the parser and the file until this batch is taken (papaparse's pause alone keeps reading the stream).
      p.pause();
      source.pause();
      const batch: CsvBatch = results.data;
      batch.quoted = quoted;
      batches.push(batch);
      signal();
    },
    complete() {
      done = true;
      signal();
    },
    error(err: Error) {
      failure ??= err;
      done = true;
      signal();
    },
  });
  try {
    for (;;) {
      const batch = batches.shift();
      if (batch) {
        yield batch;
        if (!batches.length && !done && parser) {
          (parser as Papa.Parser).resume();
          source.resume();
        }
        continue;
      }
      if (failure) throw failure;
      if (done) return;
      await new Promise<void>((resolve) => (wake = resolve));
    }
  } finally {
    if (!done) (parser as Papa.Parser | null)?.abort();
    source.destroy();
  }
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

export const isEmptyRecord = (r: string[]) => r.length === 0 || (r.length === 1 && r[0] === '');

/**
 * Numbers records as a person counts the file's lines (the row checks, the rejected-rows CSV and the CLI agree):
 * a quoted line break counts as a line; an empty line counts but is skipped. `next` gives the record's first line
 * number, or 0 for an empty record.
 */
export class LineNumbers {
  private nextLine = 1;
  next(record: string[], quoted: boolean | undefined): number {
    const line = this.nextLine;
    this.nextLine += quoted ? 1 + extraLines(record) : 1;
    return isEmptyRecord(record) ? 0 : line;
  }
}

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
  if (buf.includes(0))
    throw new CsvBytesError(
      'the file is not text: it contains NUL bytes (is it a spreadsheet or a compressed file? export it as CSV, UTF-8)',
    );
  // Cut at the last newline so a multi-byte character split by the 64 kB window is not blamed.
  const cut = buf.length < size ? buf.lastIndexOf(0x0a) : buf.length;
  let text: string;
  try {
    text = new TextDecoder('utf-8', { fatal: true }).decode(buf.subarray(0, cut > 0 ? cut : buf.length));
  } catch {
    throw new CsvBytesError('the file is not valid UTF-8 text; export it as CSV with UTF-8 encoding');
  }
  text = text.replace(/^\uFEFF/, '');
  if (text.trim() === '') throw unprocessable('the file is empty');
  if (CONTROL.test(text))
    throw new CsvBytesError('the file contains binary control characters; it does not look like a CSV');
  // The header as papaparse reads it with each candidate separator: the one giving the most columns wins.
  const fields = (d: string) =>
    (Papa.parse<string[]>(text, { delimiter: d, preview: 1, quoteChar: '"' }).data[0] ?? []).length;
  const commas = fields(','),
    semis = fields(';');
  if (commas <= 1 && semis <= 1) {
    throw unprocessable(
      fields('\t') > 1
        ? 'the header is separated by tabs; Plumbline reads comma- or semicolon-separated files'
        : 'the header has a single column: no comma or semicolon found; Plumbline reads comma- or semicolon-separated files',
    );
  }
  return { delimiter: semis > commas ? ';' : ',', bytes: size };
}

/** The header and the first rows, for the screen and the suggested mapping. */
export async function readHeaderAndSample(
  path: string,
  delimiter: Delimiter,
  maxRows = 5000,
): Promise<{ headers: string[]; sample: string[][] }> {
  let headers: string[] | null = null;
  const sample: string[][] = [];
  try {
    outer: for await (const batch of csvBatches(path, delimiter)) {
      for (const record of batch) {
        if (isEmptyRecord(record)) continue;
        if (!headers) headers = record.map((h) => h.trim());
        else sample.push(record);
        if (sample.length >= maxRows) break outer;
      }
    }
  } catch (err) {
    if (err instanceof DomainError) throw err;
    throw unprocessable(`the file could not be read as CSV: ${(err as Error).message.split('\n')[0]}`);
  }
  if (!headers) throw unprocessable('the file is empty');
  if (headers.some((h) => h === ''))
    throw unprocessable(`the header has an empty column name (column ${headers.indexOf('') + 1})`);
  const dup = headers.find((h, i) => headers!.indexOf(h) !== i);
  if (dup !== undefined) throw unprocessable(`the header names column "${dup}" twice`);
  if (sample.length === 0) throw unprocessable('the file has a header but no data rows');
  return { headers, sample };
}

/**
 * The trimmed cells of the chosen columns on the wanted lines of a CSV, line numbers counted as the row checks count
 * them (quoted line breaks included, empty lines skipped, the header is line 1). Lines whose field count differs from
 * the header's are left out. Runs in a worker thread (jobs/threads/tasks.ts): it reads the whole file up to the last
 * wanted line.
 */
export async function cellsOnLines(input: {
  path: string;
  delimiter: Delimiter;
  fields: number;
  columns: number[];
  lines: number[];
}): Promise<[number, string[]][]> {
  const wanted = new Set(input.lines);
  const last = Math.max(0, ...input.lines);
  const out: [number, string[]][] = [];
  if (!wanted.size || !input.columns.length) return out;
  const numbers = new LineNumbers();
  const batches = csvBatches(input.path, input.delimiter);
  try {
    for await (const records of batches) {
      for (const record of records) {
        const line = numbers.next(record, records.quoted);
        if (!line || line === 1) continue;
        if (line > last) return out;
        if (wanted.has(line) && record.length === input.fields)
          out.push([line, input.columns.map((i) => record[i].trim())]);
      }
    }
  } finally {
    await batches.return(undefined);
  }
  return out;
}
