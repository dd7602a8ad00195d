// Reading the cells of a file without quotes straight from its bytes. Most cells of a cohort extract are short
// numbers or one of a few repeating labels; recognising them in the bytes, without making a string per cell, is what
// lets the row checks keep up with PostgreSQL's own COPY. Anything unusual is left to the string path (uploadCheck.ts),
// which decides it exactly as for any other file.

const POW10 = [1, 10, 100, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15];

/**
 * The value of bytes[start, end) when they are a plain decimal (optional minus, digits, optionally a point and more
 * digits, at most 15 digits in all); NaN for anything else, which the caller then reads as text. With at most 15
 * digits the digits form an exact integer and the power of ten is exact, so one correctly rounded division gives the
 * same double as Number() on the text (Clinger 1990, "How to read floating point numbers accurately", the fast path).
 */
export function plainNumber(bytes: Uint8Array, start: number, end: number): number {
  let i = start;
  const negative = bytes[i] === 45;
  if (negative) i++;
  let mantissa = 0;
  let digits = 0;
  while (i < end) {
    const d = bytes[i] - 48;
    if (d < 0 || d > 9) break;
    mantissa = mantissa * 10 + d;
    digits++;
    i++;
  }
  if (digits === 0) return NaN;
  let decimals = 0;
  if (i < end && bytes[i] === 46) {
    i++;
    while (i < end) {
      const d = bytes[i] - 48;
      if (d < 0 || d > 9) break;
      mantissa = mantissa * 10 + d;
      decimals++;
      i++;
    }
    if (decimals === 0) return NaN;
  }
  if (i !== end || digits + decimals > 15) return NaN;
  const x = decimals ? mantissa / POW10[decimals] : mantissa;
  return negative ? -x : x;
}

/** One distinct cell of a column, as bytes, with what the string path made of it (one value per use of the column). */
export interface KnownCell<T> {
  bytes: Uint8Array;
  /** Length and three of the bytes in one number: most lookups compare this before any byte. */
  key: number;
  meaning: T;
}

/**
 * The cells of one column already decided by the string path, found again by their bytes. A few are compared
 * directly; past that they are found by an FNV-1a hash. Bounded: a column with more distinct cells than `limit`
 * keeps sending the new ones to the string path.
 */
export class KnownCells<T> {
  private readonly few: KnownCell<T>[] = [];
  private readonly many = new Map<number, KnownCell<T>>();
  constructor(private readonly limit = 10_000) {}

  find(bytes: Uint8Array, start: number, end: number): KnownCell<T> | undefined {
    const n = end - start;
    const key = keyOf(bytes, start, end);
    const few = this.few;
    for (let k = 0; k < few.length; k++) {
      const c = few[k];
      if (c.key === key && same(c.bytes, bytes, start, n)) return c;
    }
    if (this.many.size === 0) return undefined;
    const c = this.many.get(hash(bytes, start, end));
    return c && c.bytes.length === n && same(c.bytes, bytes, start, n) ? c : undefined;
  }

  add(bytes: Uint8Array, start: number, end: number, meaning: T): void {
    const cell = { bytes: bytes.slice(start, end), key: keyOf(bytes, start, end), meaning };
    if (this.few.length < 16) { this.few.push(cell); return; }
    if (this.many.size >= this.limit) return;
    const h = hash(bytes, start, end);
    if (!this.many.has(h)) this.many.set(h, cell);
  }
}

function keyOf(bytes: Uint8Array, start: number, end: number): number {
  const n = end - start;
  if (n === 0) return 0;
  return ((n & 0xff) | (bytes[start] << 8) | (bytes[end - 1] << 16) | (bytes[start + (n >> 1)] << 24)) >>> 0;
}

function same(a: Uint8Array, b: Uint8Array, start: number, n: number): boolean {
  if (a.length !== n) return false;
  for (let j = 0; j < n; j++) if (a[j] !== b[start + j]) return false;
  return true;
}

function hash(bytes: Uint8Array, start: number, end: number): number {
  let h = 0x811c9dc5;
  for (let i = start; i < end; i++) h = Math.imul(h ^ bytes[i], 0x01000193);
  return h;
}
