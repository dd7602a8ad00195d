// Streams a cohort CSV (the one reader, domain/cohorts/csvFile.ts) into growing typed arrays: p (a prediction column or a
// score applied row by row) and y. Every failure is one line naming the file, and the line and column when known.
import { constants } from 'node:fs';
import { access, stat } from 'node:fs/promises';
import type { ScoreModel } from '@shared/model';
import { parseDecimal } from '@shared/decimal';
import { linearPredictorRow } from '../stats/applyModel';
import { csvBatches, LineNumbers } from '../domain/cohorts/csvFile';

export class CsvInputError extends Error {
  constructor(
    readonly file: string,
    readonly line: number | null,
    readonly column: string | null,
    message: string,
  ) {
    super(`${file}${line !== null ? ` line ${line}` : ''}${column !== null ? `, column ${column}` : ''}: ${message}`);
  }
}

class Growing<T extends Float64Array | Uint8Array> {
  length = 0;
  constructor(private buf: T) {}
  push(v: number) {
    if (this.length === this.buf.length) {
      const next = new (this.buf.constructor as new (n: number) => T)(this.buf.length * 2);
      next.set(this.buf);
      this.buf = next;
    }
    this.buf[this.length++] = v;
  }
  done(): T {
    return this.buf.subarray(0, this.length) as T;
  }
}

export interface CohortSource {
  outcome: string;
  prediction?: string;
  model?: ScoreModel;
  /** keep these columns' text (gaps allowed) instead of computing a risk per row: the missing-data path, cli/missingData.ts */
  keep?: string[];
  /** Columns read as text labels (subgroup or site columns), one value per row. */
  labels?: string[];
}

/** A missing file, a folder or a file without read permission, said in one line before any reading starts. */
async function checkReadable(file: string): Promise<void> {
  let info;
  try {
    info = await stat(file);
  } catch (e) {
    const code = (e as { code?: string }).code;
    throw new CsvInputError(
      file,
      null,
      null,
      code === 'ENOENT' ? 'file not found' : `cannot be opened (${code ?? (e as Error).message})`,
    );
  }
  if (info.isDirectory()) throw new CsvInputError(file, null, null, 'is a folder, not a CSV file');
  if (!info.isFile()) throw new CsvInputError(file, null, null, 'is not a regular file');
  try {
    await access(file, constants.R_OK);
  } catch {
    throw new CsvInputError(file, null, null, 'cannot be read (permission denied)');
  }
}

const cell = (record: string[], i: number) => {
  const v = record[i];
  return v === undefined
    ? undefined
    : v.length && (v.charCodeAt(0) === 32 || v.charCodeAt(v.length - 1) === 32)
      ? v.trim()
      : v;
};

export async function readCohortCsv(
  file: string,
  source: CohortSource,
): Promise<{
  p: Float64Array;
  y: Uint8Array;
  labels: Record<string, string[]>;
  kept?: { columns: Record<string, string[]>; lines: number[] };
}> {
  await checkReadable(file);
  const p = new Growing(new Float64Array(1 << 16));
  const y = new Growing(new Uint8Array(1 << 16));
  let header: string[] | null = null;
  let yi = -1,
    pi = -1;
  const labelNames = source.labels ?? [];
  const labels: Record<string, string[]> = Object.fromEntries(labelNames.map((c) => [c, []]));
  let labelIndex: number[] = [];
  let index: Record<string, number> = {};
  const lines = new LineNumbers();
  const kept = source.keep
    ? { columns: Object.fromEntries(source.keep.map((c) => [c, [] as string[]])), lines: [] as number[] }
    : undefined;
  try {
    for await (const batch of csvBatches(file)) {
      for (const record of batch) {
        const line = lines.next(record, batch.quoted);
        if (!line) continue;
        if (!header) {
          header = record.map((h) => h.trim());
          const dup = header.find((h, i) => header!.indexOf(h) !== i);
          if (dup !== undefined)
            throw new CsvInputError(
              file,
              line,
              dup,
              'this column name appears more than once in the header; rename one of them',
            );
          index = Object.fromEntries(header.map((h, i) => [h, i]));
          const needed = [
            source.outcome,
            ...(source.prediction ? [source.prediction] : []),
            ...(source.model?.predictors.map((q) => q.column) ?? []),
            ...(source.keep ?? []),
            ...labelNames,
          ];
          for (const c of needed)
            if (!(c in index))
              throw new CsvInputError(file, line, c, `no such column in the header (columns: ${header.join(', ')})`);
          yi = index[source.outcome];
          pi = source.prediction ? index[source.prediction] : -1;
          labelIndex = labelNames.map((c) => index[c]);
          continue;
        }
        const yText = cell(record, yi);
        if (yText !== '0' && yText !== '1')
          throw new CsvInputError(
            file,
            line,
            source.outcome,
            `outcome must be 0 or 1, got ${JSON.stringify(yText ?? '')}`,
          );
        let risk: number;
        if (kept) {
          for (const c of source.keep!) kept.columns[c].push(cell(record, index[c]) ?? '');
          kept.lines.push(line);
          risk = NaN;
        } else if (pi >= 0) {
          const text = record[pi];
          risk = parseDecimal(text);
          if (!Number.isFinite(risk)) {
            throw new CsvInputError(
              file,
              line,
              source.prediction!,
              text === undefined || text.trim() === ''
                ? 'predicted probability is missing'
                : `predicted probability is not a decimal number: ${JSON.stringify(text)} (write numbers like 0.25; hexadecimal, binary and exponent forms are refused)`,
            );
          }
          if (risk < 0 || risk > 1)
            throw new CsvInputError(file, line, source.prediction!, `predicted probability ${risk} is outside [0, 1]`);
        } else {
          const lp = linearPredictorRow(source.model!, (c) => record[index[c]], line - 1);
          if (typeof lp !== 'number')
            throw new CsvInputError(file, line, lp.column, lp.message.replace(/^row \d+: /, ''));
          risk = 1 / (1 + Math.exp(-lp));
        }
        p.push(risk);
        y.push(yText === '1' ? 1 : 0);
        labelNames.forEach((c, k) => labels[c].push((record[labelIndex[k]] ?? '').trim()));
      }
    }
  } catch (e) {
    if (e instanceof CsvInputError) throw e;
    const err = e as { code?: string; message?: string };
    if (err.code === 'ENOENT') throw new CsvInputError(file, null, null, 'file not found');
    if (err.code === 'EISDIR') throw new CsvInputError(file, null, null, 'is a folder, not a CSV file');
    if (err.code === 'EACCES') throw new CsvInputError(file, null, null, 'cannot be read (permission denied)');
    throw new CsvInputError(file, null, null, `not a readable CSV (${(err.message ?? String(e)).split('\n')[0]})`);
  }
  if (!header) throw new CsvInputError(file, null, null, 'the file is empty');
  if (p.length === 0) throw new CsvInputError(file, null, null, 'no data rows below the header');
  return { p: p.done(), y: y.done(), labels, kept };
}
