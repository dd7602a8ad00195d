// How a cohort version's rows are stored: in blocks of up to BLOCK_ROWS patients, one table row per block, each
// column an array (line numbers, outcomes, periods, then numeric predictors, categorical predictors and subgroups,
// column after column). A cohort version is written once and read whole (runs, drift, recalibration), so storing it
// by column makes both cheap: COPY parses a few hundred array values per block instead of building a tuple, a key
// and a JSON document per patient, and loading for a run reads a handful of arrays.
// No database access here: the upload worker, the migration and the test fixtures share this encoding.

export const BLOCK_ROWS = 10_000;

export const COPY_BLOCKS_SQL =
  'COPY cohort_row_blocks (cohort_version_id, block_no, row_count, dated_count, line_no, outcome, event_date, num_names, num_values, cat_names, cat_values, sub_names, sub_values) FROM STDIN';

export interface BlockColumns {
  /** Numeric predictors (and a supplied probability), in the order of the score version. */
  num: string[];
  /** Predictors read as text (levels of an indicator). */
  cat: string[];
  /** Subgroup columns (sex, age band, unit…); missing values allowed. */
  sub: string[];
}

export interface BlockRow {
  line: number;
  outcome: 0 | 1;
  date: string | null;
  num: number[];
  cat: string[];
  sub: (string | null)[];
}

/** An array literal element, quoted for PostgreSQL's array syntax; then escaped for COPY's text format. */
function arrayText(v: string): string {
  const quoted = `"${v.replace(/[\\"]/g, (c) => `\\${c}`)}"`;
  return quoted.replace(/[\\\t\n\r]/g, (c) => (c === '\\' ? '\\\\' : c === '\t' ? '\\t' : c === '\n' ? '\\n' : '\\r')).replace(/\0/g, '');
}

const namesLiteral = (names: string[]) => `{${names.map(arrayText).join(',')}}`;

/** Collects rows and encodes each full block as one COPY text line. */
export class BlockWriter {
  private n = 0;
  private dated = 0;
  private block = 0;
  private readonly lines = new Int32Array(BLOCK_ROWS);
  private readonly outcomes = new Uint8Array(BLOCK_ROWS);
  private readonly dates: (string | null)[] = new Array(BLOCK_ROWS);
  private readonly num: Float64Array[];
  private readonly cat: string[][];
  private readonly sub: (string | null)[][];
  private readonly namesText: string;
  // Text values repeat a few levels: each distinct value is encoded once (bounded).
  private readonly encoded = new Map<string, string>();

  constructor(private readonly versionId: string, readonly columns: BlockColumns) {
    this.num = columns.num.map(() => new Float64Array(BLOCK_ROWS));
    this.cat = columns.cat.map(() => new Array<string>(BLOCK_ROWS));
    this.sub = columns.sub.map(() => new Array<string | null>(BLOCK_ROWS));
    this.namesText = [namesLiteral(columns.num), namesLiteral(columns.cat), namesLiteral(columns.sub)].join('\t');
  }

  get full(): boolean {
    return this.n === BLOCK_ROWS;
  }

  get pending(): number {
    return this.n;
  }

  /** Adds one row; `num`, `cat`, `sub` in the order of the columns. */
  add(line: number, outcome: number, date: string | null, num: ArrayLike<number>, cat: ArrayLike<string>, sub: ArrayLike<string | null>): void {
    const i = this.n++;
    this.lines[i] = line;
    this.outcomes[i] = outcome;
    this.dates[i] = date;
    if (date !== null) this.dated++;
    for (let k = 0; k < this.num.length; k++) this.num[k][i] = num[k];
    for (let k = 0; k < this.cat.length; k++) this.cat[k][i] = cat[k];
    for (let k = 0; k < this.sub.length; k++) this.sub[k][i] = sub[k];
  }

  private text(v: string | null): string {
    if (v === null) return 'NULL';
    let e = this.encoded.get(v);
    if (e === undefined) {
      e = arrayText(v);
      if (this.encoded.size < 20_000) this.encoded.set(v, e);
    }
    return e;
  }

  /** The pending rows as one COPY line (with its newline), or '' when none are pending. */
  flush(): string {
    const n = this.n;
    if (n === 0) return '';
    const parts: string[] = [this.versionId, String(this.block), String(n), String(this.dated)];
    parts.push(`{${this.lines.subarray(0, n).join(',')}}`, `{${this.outcomes.subarray(0, n).join(',')}}`);
    const d: string[] = new Array(n);
    for (let i = 0; i < n; i++) d[i] = this.dates[i] ?? 'NULL';
    parts.push(`{${d.join(',')}}`);
    const [numNames, catNames, subNames] = this.namesText.split('\t');
    const numValues: string[] = [];
    for (const col of this.num) numValues.push(col.subarray(0, n).join(','));
    const textValues = (cols: (string | null)[][]) => {
      const out: string[] = [];
      for (const col of cols) for (let i = 0; i < n; i++) out.push(this.text(col[i]));
      return `{${out.join(',')}}`;
    };
    parts.push(numNames, `{${numValues.join(',')}}`, catNames, textValues(this.cat), subNames, textValues(this.sub));
    this.block++;
    this.n = 0;
    this.dated = 0;
    return `${parts.join('\t')}\n`;
  }
}

/** Every block of rows as COPY text: for fixtures and the migration of rows stored before blocks. */
export function encodeBlocks(versionId: string, columns: BlockColumns, rows: Iterable<BlockRow>): string {
  const w = new BlockWriter(versionId, columns);
  let out = '';
  for (const r of rows) {
    w.add(r.line, r.outcome, r.date, r.num, r.cat, r.sub);
    if (w.full) out += w.flush();
  }
  return out + w.flush();
}

/** One stored block as the database returns it (arrays parsed by pg; periods read as text). */
export interface StoredBlock {
  row_count: number;
  line_no: number[];
  outcome: number[];
  event_date: (string | null)[];
  num_names: string[];
  num_values: number[];
  cat_names: string[];
  cat_values: string[];
  sub_names: string[];
  sub_values: (string | null)[];
}

export const SELECT_BLOCKS_SQL = `SELECT row_count, line_no, outcome, event_date::text[] AS event_date, num_names, num_values, cat_names, cat_values, sub_names, sub_values
  FROM cohort_row_blocks WHERE cohort_version_id = $1 ORDER BY block_no`;
