// Streams a cohort CSV (csv-parse) into growing typed arrays: p (a prediction column or a score applied row by row) and y.
import { createReadStream } from 'node:fs';
import { parse } from 'csv-parse';
import type { ScoreModel } from '@shared/model';
import { linearPredictorRow } from '../stats/applyModel';

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
}

export async function readCohortCsv(file: string, source: CohortSource): Promise<{ p: Float64Array; y: Uint8Array }> {
  const p = new Growing(new Float64Array(1 << 16));
  const y = new Growing(new Uint8Array(1 << 16));
  const parser = createReadStream(file).pipe(parse({ info: true, bom: true, trim: true, skip_empty_lines: true }));
  let header: string[] | null = null;
  let index: Record<string, number> = {};
  try {
    for await (const { record, info } of parser as AsyncIterable<{ record: string[]; info: { lines: number } }>) {
      const line = info.lines;
      if (!header) {
        header = record;
        index = Object.fromEntries(header.map((h, i) => [h, i]));
        const needed = [source.outcome, ...(source.prediction ? [source.prediction] : []), ...(source.model?.predictors.map((q) => q.column) ?? [])];
        for (const c of needed) if (!(c in index)) throw new CsvInputError(file, line, c, `no such column in the header (columns: ${header.join(', ')})`);
        continue;
      }
      const row = line - 1;
      const yText = record[index[source.outcome]];
      if (yText !== '0' && yText !== '1') throw new CsvInputError(file, line, source.outcome, `outcome must be 0 or 1, got ${JSON.stringify(yText ?? '')}`);
      let pi: number;
      if (source.prediction) {
        const text = record[index[source.prediction]];
        pi = text === undefined || text === '' ? NaN : Number(text);
        if (!Number.isFinite(pi)) throw new CsvInputError(file, line, source.prediction, `predicted probability is not a number: ${JSON.stringify(text ?? '')}`);
        if (pi < 0 || pi > 1) throw new CsvInputError(file, line, source.prediction, `predicted probability ${pi} is outside [0, 1]`);
      } else {
        const lp = linearPredictorRow(source.model!, (c) => record[index[c]], row);
        if (typeof lp !== 'number') throw new CsvInputError(file, line, lp.column, lp.message.replace(/^row \d+: /, ''));
        pi = 1 / (1 + Math.exp(-lp));
      }
      p.push(pi);
      y.push(yText === '1' ? 1 : 0);
    }
  } catch (e) {
    if (e instanceof CsvInputError) throw e;
    const err = e as { code?: string; lines?: number; message?: string };
    if (err.code === 'ENOENT') throw new CsvInputError(file, null, null, 'file not found');
    throw new CsvInputError(file, err.lines ?? null, null, `not a readable CSV (${err.message ?? String(e)})`);
  }
  if (!header) throw new CsvInputError(file, null, null, 'the file is empty');
  if (p.length === 0) throw new CsvInputError(file, null, null, 'no data rows below the header');
  return { p: p.done(), y: y.done() };
}
