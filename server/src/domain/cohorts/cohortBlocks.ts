// How a cohort version's rows are stored: in blocks of up to BLOCK_ROWS patients, one table row per block, by column.
// Line numbers, outcomes and periods are arrays (int4[], int2[], date[]). The numeric predictors are one bytea, the
// values as PostgreSQL's own float8send gives them (8 bytes, big-endian), column after column. Text values (levels of
// categorical predictors, subgroups) are stored once per block in text_levels; cat_codes and sub_codes hold, column
// after column, each value's position in text_levels as 4 bytes big-endian (int4send), -1 for a missing value. A
// predictor's gap (allowed by the mapping's predictorsWithGaps) is NaN among the numbers and -1 among the codes.
// A cohort version is written once and read whole (runs, drift, recalibration), so storing it by column makes both
// cheap. Packing the numbers and coding the labels, instead of one array element each, halved PostgreSQL's work
// per upload (measured: 1.5 s → 0.7–0.9 s for a million rows of 5 numbers and 4 labels): its array input parses
// every element on its own. The database checks each packed column's length against row_count.
// No database access here: the upload worker and the test fixtures share this encoding.

export const BLOCK_ROWS = 10_000;

export const COPY_BLOCKS_SQL =
  'COPY cohort_row_blocks (cohort_version_id, block_no, row_count, dated_count, line_no, outcome, event_date, num_names, num_values, cat_names, sub_names, cat_codes, sub_codes, text_levels) FROM STDIN WITH (FORMAT binary)';

export interface BlockColumns {
  /** Numeric predictors (and a supplied probability), in the order of the score version. */
  num: string[];
  /** Predictors read as text (levels of an indicator); missing values allowed where the mapping allows gaps. */
  cat: string[];
  /** Subgroup columns (sex, age band, unit…); missing values allowed. */
  sub: string[];
}

export interface BlockRow {
  line: number;
  outcome: 0 | 1;
  date: string | null;
  num: number[];
  cat: (string | null)[];
  sub: (string | null)[];
}

// PostgreSQL's binary COPY format (the manual, "COPY", section "Binary Format"): a signature, then per row a field
// count and each field as length + bytes, big-endian; arrays as in array_send, bytea as its bytes. Binary, because
// array_in (the text input of arrays) measured about 250 ns per element.
const OID = { int2: 21, int4: 23, text: 25, date: 1082 } as const;
const SIGNATURE = Buffer.from([
  0x50, 0x47, 0x43, 0x4f, 0x50, 0x59, 0x0a, 0xff, 0x0d, 0x0a, 0x00, 0, 0, 0, 0, 0, 0, 0, 0,
]);
const TRAILER = Buffer.from([0xff, 0xff]);
const PG_EPOCH_DAYS = Date.UTC(2000, 0, 1) / 86_400_000;
const FIELDS = 14;

/** A growing big-endian byte buffer. */
class Bytes {
  buf = Buffer.allocUnsafe(1 << 20);
  view = new DataView(this.buf.buffer, this.buf.byteOffset, this.buf.byteLength);
  at = 0;
  ensure(n: number) {
    if (this.at + n <= this.buf.length) return;
    const next = Buffer.allocUnsafe(Math.max(this.buf.length * 2, this.at + n));
    this.buf.copy(next, 0, 0, this.at);
    this.buf = next;
    this.view = new DataView(next.buffer, next.byteOffset, next.byteLength);
  }
  i16(v: number) {
    this.ensure(2);
    this.view.setInt16(this.at, v);
    this.at += 2;
  }
  i32(v: number) {
    this.ensure(4);
    this.view.setInt32(this.at, v);
    this.at += 4;
  }
  f64(v: number) {
    this.ensure(8);
    this.view.setFloat64(this.at, v);
    this.at += 8;
  }
  bytes(b: Buffer) {
    this.ensure(b.length);
    b.copy(this.buf, this.at);
    this.at += b.length;
  }
  /** Reserves a length word; returns its position for `endField`. */
  startField(): number {
    this.i32(0);
    return this.at;
  }
  endField(start: number) {
    this.view.setInt32(start - 4, this.at - start);
  }
  // Buffer.from(a Buffer's view) copies element by element; allocUnsafe + copy is one memcpy.
  take(): Buffer {
    const out = Buffer.allocUnsafe(this.at);
    this.buf.copy(out, 0, 0, this.at);
    this.at = 0;
    return out;
  }
}

/** Collects rows and encodes each full block as one binary COPY row. */
export class BlockWriter {
  private n = 0;
  private dated = 0;
  private block = 0;
  private started = false;
  private readonly lines = new Int32Array(BLOCK_ROWS);
  private readonly outcomes = new Uint8Array(BLOCK_ROWS);
  private readonly days = new Int32Array(BLOCK_ROWS);
  private readonly hasDate = new Uint8Array(BLOCK_ROWS);
  private readonly num: Float64Array[];
  private readonly cat: (string | null)[][];
  private readonly sub: (string | null)[][];
  private readonly out = new Bytes();
  private readonly uuid: Buffer;
  // Text values and periods repeat a few levels: each distinct one is encoded once (bounded).
  private readonly encoded = new Map<string, Buffer>();
  /** The block's text levels, in order of first use, and their codes. */
  private readonly levels: string[] = [];
  private readonly codeOf = new Map<string, number>();
  private readonly dayOf = new Map<string, number>();

  constructor(
    versionId: string,
    readonly columns: BlockColumns,
  ) {
    this.uuid = Buffer.from(versionId.replace(/-/g, ''), 'hex');
    if (this.uuid.length !== 16) throw new Error(`not a uuid: ${versionId}`);
    this.num = columns.num.map(() => new Float64Array(BLOCK_ROWS));
    this.cat = columns.cat.map(() => new Array<string | null>(BLOCK_ROWS));
    this.sub = columns.sub.map(() => new Array<string | null>(BLOCK_ROWS));
  }

  get full(): boolean {
    return this.n === BLOCK_ROWS;
  }

  get pending(): number {
    return this.n;
  }

  /** Adds one row; `num`, `cat`, `sub` in the order of the columns; `date` as YYYY-MM-DD. */
  add(
    line: number,
    outcome: number,
    date: string | null,
    num: ArrayLike<number>,
    cat: ArrayLike<string | null>,
    sub: ArrayLike<string | null>,
  ): void {
    const i = this.n++;
    this.lines[i] = line;
    this.outcomes[i] = outcome;
    if (date !== null) {
      let d = this.dayOf.get(date);
      if (d === undefined) {
        d = Date.parse(`${date}T00:00:00Z`) / 86_400_000 - PG_EPOCH_DAYS;
        if (!Number.isInteger(d)) throw new Error(`not a date: ${date}`);
        if (this.dayOf.size < 100_000) this.dayOf.set(date, d);
      }
      this.days[i] = d;
      this.hasDate[i] = 1;
      this.dated++;
    } else this.hasDate[i] = 0;
    for (let k = 0; k < this.num.length; k++) this.num[k][i] = num[k];
    for (let k = 0; k < this.cat.length; k++) this.cat[k][i] = cat[k];
    for (let k = 0; k < this.sub.length; k++) this.sub[k][i] = sub[k];
  }

  /** A text array element: its length word and UTF-8 bytes. */
  private element(v: string): Buffer {
    let e = this.encoded.get(v);
    if (e === undefined) {
      const text = Buffer.from(v.replace(/\0/g, ''), 'utf8');
      e = Buffer.allocUnsafe(4 + text.length);
      e.writeInt32BE(text.length, 0);
      text.copy(e, 4);
      if (this.encoded.size < 20_000) this.encoded.set(v, e);
    }
    return e;
  }

  private arrayHeader(o: Bytes, oid: number, count: number, hasNull: boolean) {
    o.i32(1);
    o.i32(hasNull ? 1 : 0);
    o.i32(oid);
    o.i32(count);
    o.i32(1);
  }

  /** A text[] field (column names, the block's levels). */
  private textArray(o: Bytes, values: readonly string[]) {
    const f = o.startField();
    this.arrayHeader(o, OID.text, values.length, false);
    for (const v of values) {
      // Elements are a few bytes: a plain loop copies them faster than a native copy per element.
      const e = this.element(v);
      o.ensure(e.length);
      const buf = o.buf;
      let at = o.at;
      for (let j = 0; j < e.length; j++) buf[at++] = e[j];
      o.at = at;
    }
    o.endField(f);
  }

  /** A bytea field of codes: the columns one after the other, the first `n` values of each, as positions in the levels. */
  private codes(o: Bytes, cols: readonly (readonly (string | null)[])[], n: number) {
    o.i32(4 * n * cols.length);
    o.ensure(4 * n * cols.length);
    const { levels, codeOf } = this;
    for (const col of cols) {
      for (let i = 0; i < n; i++) {
        const v = col[i];
        if (v === null) {
          o.i32(-1);
          continue;
        }
        let c = codeOf.get(v);
        if (c === undefined) {
          c = levels.length;
          levels.push(v);
          codeOf.set(v, c);
        }
        o.i32(c);
      }
    }
  }

  /** The pending rows as one binary COPY row (preceded by the format's signature the first time). */
  flush(): Buffer {
    const n = this.n;
    const o = this.out;
    if (!this.started) {
      o.bytes(SIGNATURE);
      this.started = true;
    }
    if (n === 0) return o.take();
    o.i16(FIELDS);
    o.i32(16);
    o.bytes(this.uuid);
    o.i32(4);
    o.i32(this.block);
    o.i32(4);
    o.i32(n);
    o.i32(4);
    o.i32(this.dated);
    let f = o.startField();
    this.arrayHeader(o, OID.int4, n, false);
    for (let i = 0; i < n; i++) {
      o.i32(4);
      o.i32(this.lines[i]);
    }
    o.endField(f);
    f = o.startField();
    this.arrayHeader(o, OID.int2, n, false);
    for (let i = 0; i < n; i++) {
      o.i32(2);
      o.i16(this.outcomes[i]);
    }
    o.endField(f);
    f = o.startField();
    this.arrayHeader(o, OID.date, n, this.dated < n);
    for (let i = 0; i < n; i++) {
      if (this.hasDate[i]) {
        o.i32(4);
        o.i32(this.days[i]);
      } else o.i32(-1);
    }
    o.endField(f);
    this.textArray(o, this.columns.num);
    o.i32(8 * n * this.num.length);
    o.ensure(8 * n * this.num.length);
    for (const col of this.num) for (let i = 0; i < n; i++) o.f64(col[i]);
    this.textArray(o, this.columns.cat);
    this.textArray(o, this.columns.sub);
    this.levels.length = 0;
    this.codeOf.clear();
    this.codes(o, this.cat, n);
    this.codes(o, this.sub, n);
    this.textArray(o, this.levels);
    this.block++;
    this.n = 0;
    this.dated = 0;
    return o.take();
  }

  /** Ends the COPY data (after the last flush). */
  end(): Buffer {
    const head = this.started ? Buffer.alloc(0) : SIGNATURE;
    this.started = true;
    return Buffer.concat([head, TRAILER]);
  }
}

/** Every block of rows as binary COPY data: for fixtures and the migration of rows stored before blocks. */
export function encodeBlocks(versionId: string, columns: BlockColumns, rows: Iterable<BlockRow>): Buffer {
  const w = new BlockWriter(versionId, columns);
  const parts: Buffer[] = [];
  for (const r of rows) {
    w.add(r.line, r.outcome, r.date, r.num, r.cat, r.sub);
    if (w.full) parts.push(w.flush());
  }
  if (w.pending) parts.push(w.flush());
  parts.push(w.end());
  return Buffer.concat(parts);
}

/** One stored block as the database returns it (arrays parsed by pg; periods read as text). */
export interface StoredBlock {
  row_count: number;
  line_no: number[];
  outcome: number[];
  event_date: (string | null)[];
  num_names: string[];
  /** null: a gap (stored as NaN). */
  num_values: (number | null)[];
  cat_names: string[];
  cat_values: (string | null)[];
  sub_names: string[];
  sub_values: (string | null)[];
}

// Arrays leave PostgreSQL as JSON text and are read with JSON.parse: pg's own array parser, which runs on the API
// thread, measured about five seconds (and blocking pauses of a third of a second) for a million-row version. The
// packed columns arrive as bytes.
export const SELECT_BLOCKS_SQL = `SELECT row_count, array_to_json(line_no)::text AS line_no, array_to_json(outcome)::text AS outcome,
    array_to_json(event_date)::text AS event_date, num_names, num_values, cat_names, sub_names, text_levels, cat_codes, sub_codes
  FROM cohort_row_blocks WHERE cohort_version_id = $1 ORDER BY block_no`;

/** A block row of SELECT_BLOCKS_SQL with its arrays parsed and its packed columns unpacked. */
export function parseStoredBlock(r: Record<string, unknown>): StoredBlock {
  const json = <T>(v: unknown) => JSON.parse(v as string) as T;
  const packed = r.num_values as Buffer;
  const num = new Array<number | null>(packed.length / 8);
  for (let i = 0; i < num.length; i++) {
    const x = packed.readDoubleBE(8 * i);
    num[i] = Number.isNaN(x) ? null : x;
  }
  const levels = r.text_levels as string[];
  const text = (b: Buffer) => {
    const out = new Array<string | null>(b.length / 4);
    for (let i = 0; i < out.length; i++) {
      const c = b.readInt32BE(4 * i);
      out[i] = c < 0 ? null : levels[c];
    }
    return out;
  };
  return {
    row_count: r.row_count as number,
    line_no: json(r.line_no),
    outcome: json(r.outcome),
    event_date: json(r.event_date),
    num_names: r.num_names as string[],
    num_values: num,
    cat_names: r.cat_names as string[],
    cat_values: text(r.cat_codes as Buffer),
    sub_names: r.sub_names as string[],
    sub_values: text(r.sub_codes as Buffer),
  };
}
