// Pool tasks for one upload's row checks and for the first look at a received file (jobs/threads/pool.ts). Parsing and checking a large file is CPU work: here it cannot delay the
// API's event loop. The thread holds its own PostgreSQL connection and, in ONE transaction, streams the accepted rows
// into cohort_row_blocks with COPY while it reads the file, stores the rejected cells, and marks the upload checked. A crash
// or error anywhere aborts that transaction: no row is left behind. The rows stay invisible until the steward stores
// the upload (a cohort_versions row with the planned id is what makes them a cohort version).
import { finished } from 'node:stream/promises';
import type { Writable } from 'node:stream';
import type { MessagePort } from 'node:worker_threads';
import pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import type { ScreenFinding } from '@shared/cohorts';
import { BLOCK_ROWS, COPY_BLOCKS_SQL } from '../../domain/cohorts/cohortBlocks';
import { DomainError, refused, type DomainErrorKind } from '../../domain/errors';
import { CsvBytesError, csvText, readHeaderAndSample, sniffCsv, type Delimiter } from '../../domain/cohorts/csvFile';
import { screenColumns, type ScreenResult } from '../../domain/cohorts/deidentify';
import { checkUploadRows, type CheckInput, type Rejection } from '../../domain/cohorts/uploadCheck';
import { lowerDatabaseSessionPriority } from './sessionPriority';
import { config } from '../../platform/config';

export interface UploadWorkerData extends CheckInput {
  uploadId: string;
  db: { host: string; port: number; user: string; password: string; database: string };
}

/** The first look at a received file (server/src/domain/cohorts/csvFile.ts, deidentify.ts), off the API thread too. */
export interface ScreenJob {
  kind: 'screen';
  path: string;
}

export type ScreenAnswer =
  | { type: 'screened'; delimiter: Delimiter; headers: string[]; sample: string[][]; screen: ScreenResult }
  | { type: 'refused-file'; kind: DomainErrorKind; message: string; details?: unknown };

export type UploadWorkerMessage =
  | { type: 'progress'; fraction: number; rowsRead: number; rowsRejected: number }
  | { type: 'checked'; rowsRead: number; accepted: number; rejectedRows: number }
  | { type: 'refused'; refusal: ScreenFinding }
  | {
      type: 'error';
      message: string;
      /** PostgreSQL's own words: logged on the server, not shown to the steward. */ database?: boolean;
    };

/** COPY text escaping for free text (rejected values come straight from the file). */
const copyField = (s: string) =>
  s
    .replace(/\0/g, '')
    .replace(/[\\\t\n\r]/g, (c) => (c === '\\' ? '\\\\' : c === '\t' ? '\\t' : c === '\n' ? '\\n' : '\\r'));

function write(stream: Writable, chunk: string | Buffer): Promise<void> {
  if (stream.write(chunk)) return Promise.resolve();
  return new Promise((resolve, reject) => {
    const done = (err?: Error) => {
      stream.off('drain', done);
      stream.off('error', done);
      stream.off('close', closed);
      if (err) reject(err);
      else resolve();
    };
    const closed = () => done(new Error('the COPY stream closed'));
    stream.on('drain', done);
    stream.on('error', done);
    stream.on('close', closed);
  });
}

async function copyRejections(client: pg.Client, uploadId: string, rejections: Rejection[]) {
  const copy = client.query(
    copyFrom('COPY cohort_upload_rejections (upload_id, line_no, column_name, value, reason) FROM STDIN'),
  );
  let buf = '';
  for (const [line, column, value, reason] of rejections) {
    buf += `${uploadId}\t${line}\t${copyField(column)}\t${copyField(value)}\t${copyField(reason)}\n`;
    if (buf.length > 256 * 1024) {
      await write(copy, buf);
      buf = '';
    }
  }
  copy.end(buf);
  await finished(copy);
}

const MAX_UPLOAD_COLUMNS = config.uploadMaxColumns;

async function screen(path: string): Promise<ScreenAnswer> {
  const { delimiter } = await sniffCsv(path);
  // Every byte of the file is text before anything of it is kept (csvText throws naming the line).
  for await (const piece of csvText(path)) void piece;
  const { headers, sample } = await readHeaderAndSample(path, delimiter, 5000);
  // A registry extract has tens of columns; thousands means a wrong file (or a hostile one) — refuse before storing anything.
  if (headers.length > MAX_UPLOAD_COLUMNS)
    throw refused(`the file has ${headers.length} columns; at most ${MAX_UPLOAD_COLUMNS} are accepted`);
  return { type: 'screened', delimiter, headers, sample, screen: screenColumns(headers, sample) };
}

async function main(data: UploadWorkerData, post: (m: UploadWorkerMessage) => void) {
  const client = new pg.Client({ ...data.db, application_name: 'plumbline upload check' });
  client.on('error', () => undefined); // a lost connection surfaces as the failed query below
  await client.connect();
  try {
    // The COPY's database process gives way too, as this thread does (where the OS lets us; see sessionPriority.ts).
    await lowerDatabaseSessionPriority(client, data.db.host);
    await client.query('BEGIN');
    const copy = client.query(copyFrom(COPY_BLOCKS_SQL));
    const copied = finished(copy);
    copied.catch(() => undefined); // observed below; an early failure also rejects the next write
    const result = await checkUploadRows(data, {
      rows: (text) => write(copy, text),
      progress: (fraction, rowsRead, rowsRejected) => post({ type: 'progress', fraction, rowsRead, rowsRejected }),
    });
    copy.end();
    if (result.refusal)
      await copied.catch(() => undefined); // cut short on purpose: rolled back just below
    else await copied;
    if (result.refusal) {
      await client.query('ROLLBACK');
      post({ type: 'refused', refusal: result.refusal });
      return;
    }
    const blocks = Math.ceil(result.accepted / BLOCK_ROWS);
    if (copy.rowCount !== blocks) throw new Error(`COPY stored ${copy.rowCount} blocks of rows, expected ${blocks}`);
    if (result.rejections.length) await copyRejections(client, data.uploadId, result.rejections);
    const updated = await client.query(
      `UPDATE cohort_uploads SET status = 'checked', progress = 1, rows_read = $2, rows_accepted = $3, rows_rejected = $4, events = $5,
         rejection_counts = $6, column_summary = $7, event_period = $8, missingness = $10, updated_at = now()
       WHERE id = $1 AND status = 'processing' AND planned_version_id = $9`,
      [
        data.uploadId,
        result.rowsRead,
        result.accepted,
        result.rejectedRows,
        result.events,
        JSON.stringify(result.reasonCounts),
        JSON.stringify(result.columnSummary),
        result.eventPeriod ? JSON.stringify(result.eventPeriod) : null,
        data.plannedVersionId,
        JSON.stringify(result.missingness),
      ],
    );
    if (updated.rowCount !== 1) throw new Error('the upload was changed while its rows were checked');
    await client.query('COMMIT');
    post({ type: 'checked', rowsRead: result.rowsRead, accepted: result.accepted, rejectedRows: result.rejectedRows });
  } catch (err) {
    await client.query('ROLLBACK').catch(() => undefined);
    // Bytes that are not UTF-8 text refuse the file, like an identifier does (nothing of it is kept).
    if (err instanceof CsvBytesError) {
      post({ type: 'refused', refusal: { column: '(file)', category: 'not text', reason: err.message } });
      return;
    }
    throw err;
  } finally {
    await client.end().catch(() => undefined);
  }
}

/** An error from pg carries a SQLSTATE and a severity; anything else is about the file (parsing, reading). */
function failure(err: Error): Extract<UploadWorkerMessage, { type: 'error' }> {
  const database =
    typeof (err as { severity?: unknown }).severity === 'string' ||
    /^[0-9A-Z]{5}$/.test(String((err as { code?: unknown }).code ?? ''));
  return { type: 'error', message: (err?.message ?? String(err)).split('\n')[0], database };
}

/** The pool task for a screen: the answer, a refusal of the file, or an error. */
export async function screenFile(
  path: string,
): Promise<ScreenAnswer | Extract<UploadWorkerMessage, { type: 'error' }>> {
  try {
    return await screen(path);
  } catch (err) {
    return err instanceof DomainError
      ? { type: 'refused-file', kind: err.kind, message: err.message, details: err.details }
      : failure(err as Error);
  }
}

/** The pool task for a full check: progress goes to `progress`; the ending (stored or rolled back by then) is returned. */
export async function checkUpload(task: {
  data: UploadWorkerData;
  progress: MessagePort;
}): Promise<Exclude<UploadWorkerMessage, { type: 'progress' }>> {
  let ending: Exclude<UploadWorkerMessage, { type: 'progress' }> | null = null;
  try {
    await main(task.data, (m) => {
      if (m.type === 'progress') task.progress.postMessage(m);
      else ending = m;
    });
  } catch (err) {
    return failure(err as Error);
  }
  return ending ?? { type: 'error', message: 'the check ended without an answer' };
}
