// server/src/services/csvFile.ts
import { createReadStream } from "node:fs";
import { Readable } from "node:stream";
import Papa from "papaparse";

// server/src/middleware/errors.ts
import { ZodError } from "zod";
var HttpError = class extends Error {
  constructor(status, message, details) {
    super(message);
    this.status = status;
    this.details = details;
  }
};
var DRAIN_LIMIT = 16 * 1024 * 1024;

// server/src/services/csvFile.ts
var CsvBytesError = class extends HttpError {
  constructor(message) {
    super(415, message);
  }
};
var CONTROL = /[\u0000-\u0008\u000e-\u001f]/;
function countNewlines(text, end = text.length) {
  let n = 0;
  for (let i = text.indexOf("\n"); i !== -1 && i < end; i = text.indexOf("\n", i + 1)) n++;
  return n;
}
function firstBadByte(chunk, carried) {
  const lossy = chunk.toString("utf8");
  const at = lossy.indexOf("\uFFFD");
  return at === -1 ? 0 : Math.max(0, at - carried);
}
async function* csvText(path, onBytes) {
  const decoder = new TextDecoder("utf-8", { fatal: true });
  const input = createReadStream(path, { highWaterMark: 1024 * 1024 });
  let line = 1;
  let first = true;
  try {
    for await (const chunk of input) {
      let text;
      try {
        text = decoder.decode(chunk, { stream: true });
      } catch {
        const lossy = chunk.toString("utf8");
        throw new CsvBytesError(`the file is not valid UTF-8 text (line ${line + countNewlines(lossy, firstBadByte(chunk, 0))}); export it as CSV with UTF-8 encoding`);
      }
      if (first) {
        first = false;
        if (text.charCodeAt(0) === 65279) text = text.slice(1);
      }
      const bad = CONTROL.exec(text);
      if (bad) {
        const what = bad[0] === "\0" ? "a NUL byte" : "a binary control character";
        throw new CsvBytesError(`the file is not text: it contains ${what} (line ${line + countNewlines(text, bad.index)}); is it a spreadsheet or a compressed file? export it as CSV, UTF-8`);
      }
      line += countNewlines(text);
      onBytes?.(input.bytesRead);
      if (text) yield text;
    }
    try {
      const rest = decoder.decode();
      if (rest) yield rest;
    } catch {
      throw new CsvBytesError(`the file is not valid UTF-8 text (it ends inside a character, line ${line}); export it as CSV with UTF-8 encoding`);
    }
  } finally {
    input.destroy();
  }
}
async function* csvBatches(path, delimiter, onBytes) {
  const source = Readable.from(csvText(path, onBytes), { objectMode: false, encoding: "utf8" });
  const batches = [];
  let parser = null;
  let done = false;
  let failure = null;
  let wake = null;
  const signal = () => {
    const w = wake;
    wake = null;
    w?.();
  };
  source.on("error", (err) => {
    failure ??= err;
    done = true;
    signal();
  });
  Papa.parse(source, {
    delimiter: delimiter ?? "",
    quoteChar: '"',
    skipEmptyLines: false,
    chunk(results, p) {
      parser = p;
      p.pause();
      source.pause();
      batches.push(results.data);
      signal();
    },
    complete() {
      done = true;
      signal();
    },
    error(err) {
      failure ??= err;
      done = true;
      signal();
    }
  });
  try {
    for (; ; ) {
      const batch = batches.shift();
      if (batch) {
        yield batch;
        if (!batches.length && !done && parser) {
          parser.resume();
          source.resume();
        }
        continue;
      }
      if (failure) throw failure;
      if (done) return;
      await new Promise((resolve) => wake = resolve);
    }
  } finally {
    if (!done) parser?.abort();
    source.destroy();
  }
}
function extraLines(record) {
  let n = 0;
  for (let i = 0; i < record.length; i++) {
    const f = record[i];
    if (f.length > 0 && f.indexOf("\n") !== -1) {
      for (let j = 0; j < f.length; j++) if (f.charCodeAt(j) === 10) n++;
    }
  }
  return n;
}
var isEmptyRecord = (r) => r.length === 0 || r.length === 1 && r[0] === "";

// shared/src/decimal.ts
var DECIMAL = /^[+-]?(\d+\.?\d*|\.\d+)$/;
function parseDecimal(text) {
  if (text === void 0) return NaN;
  const v = text.length > 0 && (text.charCodeAt(0) === 32 || text.charCodeAt(text.length - 1) === 32) ? text.trim() : text;
  return DECIMAL.test(v) ? Number(v) : NaN;
}

// server/src/services/cohortBlocks.ts
var BLOCK_ROWS = 1e4;
var OID = { int2: 21, int4: 23, text: 25, date: 1082 };
var SIGNATURE = Buffer.from([80, 71, 67, 79, 80, 89, 10, 255, 13, 10, 0, 0, 0, 0, 0, 0, 0, 0, 0]);
var TRAILER = Buffer.from([255, 255]);
var PG_EPOCH_DAYS = Date.UTC(2e3, 0, 1) / 864e5;
var FIELDS = 14;
var Bytes = class {
  constructor() {
    this.buf = Buffer.allocUnsafe(1 << 20);
    this.view = new DataView(this.buf.buffer, this.buf.byteOffset, this.buf.byteLength);
    this.at = 0;
  }
  ensure(n) {
    if (this.at + n <= this.buf.length) return;
    const next = Buffer.allocUnsafe(Math.max(this.buf.length * 2, this.at + n));
    this.buf.copy(next, 0, 0, this.at);
    this.buf = next;
    this.view = new DataView(next.buffer, next.byteOffset, next.byteLength);
  }
  i16(v) {
    this.ensure(2);
    this.view.setInt16(this.at, v);
    this.at += 2;
  }
  i32(v) {
    this.ensure(4);
    this.view.setInt32(this.at, v);
    this.at += 4;
  }
  f64(v) {
    this.ensure(8);
    this.view.setFloat64(this.at, v);
    this.at += 8;
  }
  bytes(b) {
    this.ensure(b.length);
    b.copy(this.buf, this.at);
    this.at += b.length;
  }
  /** Reserves a length word; returns its position for `endField`. */
  startField() {
    this.i32(0);
    return this.at;
  }
  endField(start) {
    this.view.setInt32(start - 4, this.at - start);
  }
  // Buffer.from(a Buffer's view) copies element by element; allocUnsafe + copy is one memcpy.
  take() {
    const out = Buffer.allocUnsafe(this.at);
    this.buf.copy(out, 0, 0, this.at);
    this.at = 0;
    return out;
  }
};
var BlockWriter = class {
  constructor(versionId, columns) {
    this.columns = columns;
    this.n = 0;
    this.dated = 0;
    this.block = 0;
    this.started = false;
    this.lines = new Int32Array(BLOCK_ROWS);
    this.outcomes = new Uint8Array(BLOCK_ROWS);
    this.days = new Int32Array(BLOCK_ROWS);
    this.hasDate = new Uint8Array(BLOCK_ROWS);
    this.out = new Bytes();
    // Text values and periods repeat a few levels: each distinct one is encoded once (bounded).
    this.encoded = /* @__PURE__ */ new Map();
    /** The block's text levels, in order of first use, and their codes. */
    this.levels = [];
    this.codeOf = /* @__PURE__ */ new Map();
    this.dayOf = /* @__PURE__ */ new Map();
    this.uuid = Buffer.from(versionId.replace(/-/g, ""), "hex");
    if (this.uuid.length !== 16) throw new Error(`not a uuid: ${versionId}`);
    this.num = columns.num.map(() => new Float64Array(BLOCK_ROWS));
    this.cat = columns.cat.map(() => new Array(BLOCK_ROWS));
    this.sub = columns.sub.map(() => new Array(BLOCK_ROWS));
  }
  get full() {
    return this.n === BLOCK_ROWS;
  }
  get pending() {
    return this.n;
  }
  /** Adds one row; `num`, `cat`, `sub` in the order of the columns; `date` as YYYY-MM-DD. */
  add(line, outcome, date, num, cat, sub) {
    const i = this.n++;
    this.lines[i] = line;
    this.outcomes[i] = outcome;
    if (date !== null) {
      let d = this.dayOf.get(date);
      if (d === void 0) {
        d = Date.parse(`${date}T00:00:00Z`) / 864e5 - PG_EPOCH_DAYS;
        if (!Number.isInteger(d)) throw new Error(`not a date: ${date}`);
        if (this.dayOf.size < 1e5) this.dayOf.set(date, d);
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
  element(v) {
    let e = this.encoded.get(v);
    if (e === void 0) {
      const text = Buffer.from(v.replace(/\0/g, ""), "utf8");
      e = Buffer.allocUnsafe(4 + text.length);
      e.writeInt32BE(text.length, 0);
      text.copy(e, 4);
      if (this.encoded.size < 2e4) this.encoded.set(v, e);
    }
    return e;
  }
  arrayHeader(o, oid, count, hasNull) {
    o.i32(1);
    o.i32(hasNull ? 1 : 0);
    o.i32(oid);
    o.i32(count);
    o.i32(1);
  }
  /** A text[] field (column names, the block's levels). */
  textArray(o, values) {
    const f = o.startField();
    this.arrayHeader(o, OID.text, values.length, false);
    for (const v of values) {
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
  codes(o, cols, n) {
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
        if (c === void 0) {
          c = levels.length;
          levels.push(v);
          codeOf.set(v, c);
        }
        o.i32(c);
      }
    }
  }
  /** The pending rows as one binary COPY row (preceded by the format's signature the first time). */
  flush() {
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
  end() {
    const head = this.started ? Buffer.alloc(0) : SIGNATURE;
    this.started = true;
    return Buffer.concat([head, TRAILER]);
  }
};

// shared/src/csv.ts
import { stringify } from "csv-stringify/sync";
var PLAIN_NUMBER = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;
function looksLikeFormula(text) {
  if (text === "") return false;
  const c = text[0];
  if (c === "	" || c === "\r" || c === "\n") return true;
  const v = c === " " ? text.trim() : text;
  const d = v[0];
  if (d !== "=" && d !== "+" && d !== "-" && d !== "@") return false;
  return !PLAIN_NUMBER.test(v.trim());
}

// server/src/services/deidentify.ts
var norm = (h) => h.toLowerCase().replace(/[^a-z0-9]+/g, "_").replace(/^_|_$/g, "");
var FULL_DATE = [
  /^\d{4}[-/.]\d{1,2}[-/.]\d{1,2}([ T]\d{1,2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:?\d{2})?)?$/,
  // 2025-03-14, 2025/3/14, with a time
  /^\d{1,2}[-/.]\d{1,2}[-/.]\d{2,4}$/,
  // 14/03/2025, 3-14-25
  /^\d{1,2}[ -](jan|feb|mar|apr|may|jun|jul|aug|sep|sept|oct|nov|dec)[a-z]*[ -,]+\d{2,4}$/i,
  // 14 Mar 2025
  /^(jan|feb|mar|apr|may|jun|jul|aug|sep|sept|oct|nov|dec)[a-z]* \d{1,2},? \d{4}$/i,
  // March 14, 2025
  /^\d{8}T\d{4,6}$/
  // 20250314T1030
];
var VALUE_RULES = [
  { category: "e-mail addresses", test: (v) => /^[^\s@]+@[^\s@]+\.[a-z]{2,}$/i.test(v), reason: "holds e-mail addresses" },
  { category: "web URLs", test: (v) => /^(https?:\/\/|ftp:\/\/|www\.)\S+$/i.test(v), reason: "holds web addresses" },
  { category: "device identifiers", test: (v) => /^([0-9a-f]{2}[:-]){5}[0-9a-f]{2}$/i.test(v), reason: "holds MAC (device) addresses" },
  { category: "IP addresses", test: (v) => isIpv4(v) || isIpv6(v), reason: "holds IP addresses" },
  { category: "social security numbers", test: (v) => /^\d{3}-\d{2}-\d{4}$/.test(v), reason: "holds values shaped like social security numbers (ddd-dd-dddd)" },
  { category: "dates", test: (v) => FULL_DATE.some((r) => r.test(v)) || isFullDate(v), reason: "holds full dates (day, month and year); Safe Harbor allows only the year" },
  { category: "geographic subdivision", test: (v) => /^\d{5}-\d{4}$/.test(v), reason: "holds full ZIP+4 codes" },
  { category: "telephone numbers", test: (v) => isPhone(v), reason: "holds telephone numbers" },
  { category: "vehicle identifiers", test: (v) => /^[A-HJ-NPR-Z0-9]{17}$/.test(v) && /\d/.test(v) && /[A-Z]/.test(v), reason: "holds 17-character vehicle identification numbers" },
  { category: "geographic subdivision", test: (v) => /^[A-Z]{1,2}\d[A-Z\d]? ?\d[A-Z]{2}$/i.test(v) && /\d[A-Z]{2}$/i.test(v.replace(" ", "")), reason: "holds full postcodes" },
  {
    category: "geographic subdivision",
    test: (v) => /^\d+[A-Za-z]?\s+(\S+\s+){0,4}(street|st|road|rd|avenue|ave|lane|ln|drive|dr|boulevard|blvd|way|court|ct|place|pl|terrace|close|crescent)\.?(\s|,|$)/i.test(v),
    reason: "holds street addresses"
  }
];
function isIpv4(v) {
  const m = /^(\d{1,3})\.(\d{1,3})\.(\d{1,3})\.(\d{1,3})$/.exec(v);
  return !!m && m.slice(1).every((p) => Number(p) <= 255);
}
function isIpv6(v) {
  if (!/^[0-9a-f:]+$/i.test(v)) return false;
  const colons = (v.match(/:/g) ?? []).length;
  return colons === 7 && /^([0-9a-f]{1,4}:){7}[0-9a-f]{1,4}$/i.test(v) || v.includes("::") && colons >= 2 && colons <= 7 && /[0-9a-f]/i.test(v);
}
function isPhone(v) {
  if (!/^\+?[\d()\s.-]+$/.test(v)) return false;
  if (!/[\s().-]/.test(v.replace(/^\+/, ""))) return false;
  const digits2 = v.replace(/\D/g, "").length;
  if (digits2 < 9 || digits2 > 15) return false;
  return /\d{2,4}[\s.)-]+\d{2,4}/.test(v) && !/^-?\d+\.\d+$/.test(v);
}
var MONTH = /^(jan|feb|mar|apr|may|jun|jul|aug|sep|sept|oct|nov|dec|january|february|march|april|june|july|august|september|october|november|december)$/;
var WEEKDAY = /\b(mon|tue|tues|wed|thu|thur|thurs|fri|sat|sun|monday|tuesday|wednesday|thursday|friday|saturday|sunday)\b/g;
var TIME_AT_END = /(t|\s+|,\s*)\d{1,2}:\d{2}(:\d{2}([.,]\d+)?)?\s*(am|pm)?\s*(z|utc|gmt|[+-]\d{2}:?\d{2})?$/;
var daysIn = (y, m) => new Date(Date.UTC(y, m, 0)).getUTCDate();
var validYmd = (y, m, d) => y >= 1800 && y <= 2199 && m >= 1 && m <= 12 && d >= 1 && d <= daysIn(y, m);
var yearLike = (t) => t.length === 4 && +t >= 1800 && +t <= 2199 || t.length === 2;
var digits = (t) => /^\d+$/.test(t);
function eightDigitDate(t) {
  if (!/^\d{8}$/.test(t)) return false;
  const n = (a, b) => Number(t.slice(a, b));
  return validYmd(n(0, 4), n(4, 6), n(6, 8)) || validYmd(n(4, 8), n(2, 4), n(0, 2)) || validYmd(n(4, 8), n(0, 2), n(2, 4));
}
function isFullDate(raw) {
  let v = raw.trim().toLowerCase();
  if (v.length < 6 || v.length > 48) return false;
  if (/^\d{4}-?w(0[1-9]|[1-4]\d|5[0-3])(-?[1-7])?$/.test(v)) return true;
  const ord = /^(\d{4})-?(\d{3})$/.exec(v);
  if (ord && +ord[1] >= 1800 && +ord[1] <= 2199 && +ord[2] >= 1 && +ord[2] <= 366) return true;
  v = v.replace(TIME_AT_END, "").replace(WEEKDAY, " ").replace(/(\d)(st|nd|rd|th)\b/g, "$1").replace(/\bof\b/g, " ");
  if (/[^a-z0-9\s\-/.,_']/.test(v)) return false;
  const tokens = v.match(/[a-z]+|\d+/g) ?? [];
  if (tokens.length === 1) return eightDigitDate(tokens[0]);
  if (tokens.length !== 3) return false;
  const month = tokens.findIndex((t) => MONTH.test(t));
  if (month >= 0) {
    const [a2, b2] = tokens.filter((_, i) => i !== month);
    if (!digits(a2) || !digits(b2)) return false;
    const day = (t) => t.length <= 2 && +t >= 1 && +t <= 31;
    return day(a2) && yearLike(b2) || day(b2) && yearLike(a2) && a2.length === 4;
  }
  if (!tokens.every(digits)) return false;
  const [a, b, c] = tokens;
  if (a.length === 4) return b.length <= 2 && c.length <= 2 && validYmd(+a, +b, +c);
  if (a.length > 2 || b.length > 2 || !(c.length === 4 || c.length === 2)) return false;
  const y = c.length === 4 ? +c : 2e3 + +c;
  return validYmd(y, +b, +a) || validYmd(y, +a, +b);
}
var isDateHeader = (h) => /(^|_)(date|dates|datetime|time|timestamp|ts|dt|day|dob|dod|born|birth|death|admit|admitted|admission|discharge|discharged|visit|epoch|when)($|_)|_(at|on)$/.test(norm(h));
var isAgeLikeHeader = (h) => isAgeHeader(h) || /(^|_)age($|_)|age_?(band|group|range|class)/.test(norm(h));
function cellRules(header, role) {
  const dateHeader = isDateHeader(header);
  const ageHeader = isAgeLikeHeader(header);
  const numberShape = /^[+-]?(\d+)(\.\d*)?$/;
  return (v) => {
    if (v === "") return null;
    const num = numberShape.exec(v);
    if (num) {
      const int = num[1];
      const n = int.length;
      if (ageHeader && ageOver89(v)) return { category: "ages over 89", reason: 'holds an age over 89; group them as "90+"' };
      if (n < 5) return null;
      if (!num[2] && n === 8 && eightDigitDate(int)) return { category: "dates", reason: "holds an eight-digit full date (day, month and year)" };
      if (dateHeader && n >= 9 && n <= 13) return { category: "dates", reason: "holds an epoch timestamp in a date column (a full date)" };
      if (n >= 7) return { category: "unique identifying numbers", reason: `holds a long digit string (${n} digits), like a record, account or telephone number` };
      if (role === "label" && !num[2] && n === 5) return { category: "geographic subdivision", reason: "holds a five-digit value in a label column, like a ZIP code" };
      if (role === "label" && !num[2] && n === 6) return { category: "unique identifying numbers", reason: "holds a six-digit value in a label column, like a record number" };
      return null;
    }
    const hit = valueIdentifier(v);
    if (hit) return hit;
    if (/\d{7,}/.test(v)) return { category: "unique identifying numbers", reason: "holds a long digit string (7+ digits), like a record, account or telephone number" };
    if (v.length >= 6 && /^[A-Za-z0-9][A-Za-z0-9_\-/.#:]+$/.test(v) && /[A-Za-z]/.test(v) && (v.match(/\d/g)?.length ?? 0) >= 5 && !/^\d{4}[-/ ]?[QqHhTt]\d{1,2}$/.test(v)) {
      return { category: "unique identifying numbers", reason: "holds a code of letters and five or more digits, like a record, plan, licence or device number" };
    }
    if (ageHeader) {
      const ages = v.match(/\d+/g)?.map(Number) ?? [];
      if (ages.some((a) => a > 89 && a <= 120) && !/^(90\s*\+|>\s*89|≥\s*90|>=\s*90|90 (and|or) (over|older))$/i.test(v)) {
        return { category: "ages over 89", reason: 'holds an age group above 89; group them as "90+"' };
      }
    }
    return null;
  };
}
var NAME_PART = /^(?:[A-Z]['’])?[A-Z][a-z]+(?:[A-Z][a-z]+)?(?:[-'’][A-Z]?[a-z'’]+)*,?$/;
var INITIAL = /^[A-Z]\.?$/;
function nameLike(v) {
  if (v.length < 5 || v.length > 60) return false;
  const parts = v.split(" ");
  if (parts.length < 2 || parts.length > 4) return false;
  let names = 0;
  for (let i = 0; i < parts.length; i++) {
    if (NAME_PART.test(parts[i])) names++;
    else if (!(INITIAL.test(parts[i]) && i > 0 && i < parts.length - 1)) return false;
  }
  return names >= 2 && names <= 3;
}
function valueIdentifier(raw) {
  const v = raw.trim();
  if (v.length < 5 || v.length > 200) return null;
  if (/^-?\d{1,5}(\.\d+)?$/.test(v)) return null;
  for (const r of VALUE_RULES) if (r.test(v)) return { category: r.category, reason: r.reason };
  return null;
}
var isNumber = (v) => v !== "" && Number.isFinite(Number(v));
var isAgeHeader = (h) => /^(age|age_years|age_yrs|age_at_[a-z_]+|patient_age|years_of_age)$/.test(norm(h));
function ageOver89(raw) {
  const v = raw.trim();
  if (!isNumber(v)) return false;
  const n = Number(v);
  return n > 89 && n <= 120;
}

// server/src/services/uploadCheck.ts
var MAX_STORED_REJECTIONS = 1e5;
var RESERVOIR = 5e3;
var Accumulator = class {
  constructor(asNumber) {
    this.asNumber = asNumber;
    this.n = 0;
    this.missing = 0;
    this.numeric = 0;
    this.min = Infinity;
    this.max = -Infinity;
    this.sum = 0;
    this.reservoir = [];
    // The first few levels are counted in arrays (cells arrive as canonical copies, so === is mostly a pointer test).
    this.fewLevels = [];
    this.fewCounts = [];
    this.moreLevels = /* @__PURE__ */ new Map();
    this.seed = 2654435769;
    // Algorithm L (Li 1994, "Reservoir-sampling algorithms of time complexity O(n(1 + log(N/n)))"): once the reservoir
    // is full, the number of values to skip is drawn, instead of one draw per value.
    this.w = 1;
    this.nextPick = 0;
  }
  /** xorshift32 in (0, 1): a seeded reservoir keeps the histogram reproducible for the same file. */
  rand() {
    this.seed ^= this.seed << 13;
    this.seed ^= this.seed >>> 17;
    this.seed ^= this.seed << 5;
    return ((this.seed >>> 0) + 1) / 4294967297;
  }
  skip() {
    this.w *= Math.exp(Math.log(this.rand()) / RESERVOIR);
    this.nextPick += Math.floor(Math.log(this.rand()) / Math.log(1 - this.w)) + 1;
  }
  add(v) {
    if (v === null || v === "") {
      this.missing++;
      return;
    }
    this.n++;
    if (this.asNumber && typeof v === "number") {
      const i = this.numeric++;
      if (v < this.min) this.min = v;
      if (v > this.max) this.max = v;
      this.sum += v;
      if (i < RESERVOIR) {
        this.reservoir.push(v);
        if (i === RESERVOIR - 1) {
          this.nextPick = i;
          this.skip();
        }
      } else if (i === this.nextPick) {
        this.reservoir[Math.floor(this.rand() * RESERVOIR)] = v;
        this.skip();
      }
      return;
    }
    const s = String(v);
    const few = this.fewLevels;
    for (let k = 0; k < few.length; k++) if (few[k] === s) {
      this.fewCounts[k]++;
      return;
    }
    if (few.length < 16) {
      few.push(s);
      this.fewCounts.push(1);
      return;
    }
    const c = this.moreLevels.get(s);
    if (c !== void 0) this.moreLevels.set(s, c + 1);
    else if (few.length + this.moreLevels.size < 1e3) this.moreLevels.set(s, 1);
  }
  summary() {
    if (this.asNumber) {
      const bins = 20;
      const histogram = [];
      if (this.numeric > 0) {
        const width = this.max > this.min ? (this.max - this.min) / bins : 1;
        for (let b = 0; b < bins; b++) histogram.push({ from: this.min + b * width, to: this.min + (b + 1) * width, count: 0 });
        const scale = this.numeric / this.reservoir.length;
        for (const v of this.reservoir) histogram[Math.min(bins - 1, Math.floor((v - this.min) / width))].count++;
        if (scale !== 1) for (const h of histogram) h.count = Math.round(h.count * scale);
      }
      return {
        kind: "numeric",
        n: this.n,
        missing: this.missing,
        min: this.numeric ? this.min : null,
        max: this.numeric ? this.max : null,
        mean: this.numeric ? this.sum / this.numeric : null,
        histogram,
        histogramSampled: this.numeric > RESERVOIR
      };
    }
    const counted = this.fewLevels.map((l, k) => [l, this.fewCounts[k]]);
    const sorted = [...counted, ...this.moreLevels.entries()].sort((a, b) => b[1] - a[1]);
    return { kind: "categorical", n: this.n, missing: this.missing, levels: sorted.slice(0, 50).map(([value, count]) => ({ value, count })), otherLevels: Math.max(0, sorted.length - 50) };
  }
};
function periodStart(raw) {
  const v = raw.trim();
  let m = /^(\d{4})-(0[1-9]|1[0-2])$/.exec(v);
  if (m) return `${m[1]}-${m[2]}-01`;
  m = /^(\d{4})-?Q([1-4])$/i.exec(v);
  if (m) return `${m[1]}-${String((Number(m[2]) - 1) * 3 + 1).padStart(2, "0")}-01`;
  m = /^(\d{4})$/.exec(v);
  if (m) return `${m[1]}-01-01`;
  return null;
}
var CLEAN = { formula: false, hit: null, name: false };
var Interner = class {
  constructor(judge = () => CLEAN) {
    this.judge = judge;
    this.few = [];
    this.fewVerdicts = [];
    this.many = /* @__PURE__ */ new Map();
    /** The verdict of the value last interned (judged once per distinct value). */
    this.verdict = CLEAN;
  }
  intern(v) {
    const few = this.few;
    for (let i = 0; i < few.length; i++) if (few[i] === v) {
      this.verdict = this.fewVerdicts[i];
      return few[i];
    }
    if (few.length < 16) {
      this.verdict = this.judge(v);
      few.push(v);
      this.fewVerdicts.push(this.verdict);
      return v;
    }
    const hit = this.many.get(v);
    if (hit !== void 0) {
      this.verdict = hit[1];
      return hit[0];
    }
    this.verdict = this.judge(v);
    if (this.many.size < 5e4) this.many.set(v, [v, this.verdict]);
    return v;
  }
};
function shortPlainNumber(v) {
  if (v.length > 4) return false;
  for (let i = 0; i < v.length; i++) {
    const c = v.charCodeAt(i);
    if ((c < 48 || c > 57) && c !== 46) return false;
  }
  return v.length > 0;
}
async function checkUploadRows(input, sink) {
  const { headers, mapping: mapping2, plannedVersionId } = input;
  const col = (name) => headers.indexOf(name);
  const preds = input.predictors.map((p) => {
    const fileCol = mapping2.predictors[p.column];
    const range = mapping2.ranges[p.column] ?? {};
    const age = /^age/i.test(p.column) || isAgeHeader(fileCol);
    const prob = input.supplied;
    return {
      name: p.column,
      fileCol,
      idx: col(fileCol),
      numeric: p.kind === "numeric",
      positiveOnly: p.positiveOnly,
      age,
      min: range.min ?? (age ? 0 : prob ? 0 : -Infinity),
      max: range.max ?? (age ? 120 : prob ? 1 : Infinity)
    };
  });
  const outcomeIdx = col(mapping2.outcome.column);
  const pos = new Set(mapping2.outcome.positive.map((s) => s.trim().toLowerCase()));
  const neg = new Set(mapping2.outcome.negative.map((s) => s.trim().toLowerCase()));
  const dateIdx = mapping2.date ? col(mapping2.date.column) : -1;
  const subs = Object.entries(mapping2.subgroups).map(([name, c]) => ({ name, idx: col(c), fileCol: c }));
  const summaries = /* @__PURE__ */ new Map();
  for (const p of preds) summaries.set(p.name, new Accumulator(p.numeric));
  summaries.set(`outcome (${mapping2.outcome.column})`, new Accumulator(false));
  if (mapping2.date) summaries.set(`period (${mapping2.date.column})`, new Accumulator(false));
  for (const s of subs) summaries.set(s.name, new Accumulator(false));
  const predAcc = preds.map((p) => summaries.get(p.name));
  const outcomeAcc = summaries.get(`outcome (${mapping2.outcome.column})`);
  const dateAcc = mapping2.date ? summaries.get(`period (${mapping2.date.column})`) : null;
  const subAcc = subs.map((s) => summaries.get(s.name));
  const mappedIdx = [...new Set([...preds.map((p) => p.idx), outcomeIdx, dateIdx, ...subs.map((s) => s.idx)].filter((i) => i >= 0))];
  const numericIdx = new Set(preds.filter((p) => p.numeric).map((p) => p.idx));
  const labelIdx = /* @__PURE__ */ new Set([...preds.filter((p) => !p.numeric).map((p) => p.idx), ...subs.map((s) => s.idx)]);
  const judgeFor = (i) => {
    const rule = cellRules(headers[i], labelIdx.has(i) && !numericIdx.has(i) ? "label" : "number");
    return (raw) => {
      const v = raw.trim();
      const formula = looksLikeFormula(v);
      const hit = rule(v);
      const name = !hit && nameLike(v);
      return formula || hit || name ? { formula, hit, name } : CLEAN;
    };
  };
  const judges = mappedIdx.map(judgeFor);
  const cellIntern = mappedIdx.map((i, j) => numericIdx.has(i) ? null : new Interner(judges[j]));
  const numberVerdicts = mappedIdx.map(() => /* @__PURE__ */ new Map());
  const judgeNumber = (j, v) => {
    if (shortPlainNumber(v)) return CLEAN;
    const cache = numberVerdicts[j];
    let verdict = cache.get(v);
    if (verdict === void 0) {
      verdict = judges[j](v);
      if (cache.size >= 5e4) cache.clear();
      cache.set(v, verdict);
    }
    return verdict;
  };
  const names = mappedIdx.map(() => /* @__PURE__ */ new Map());
  const numPreds = preds.filter((p) => p.numeric);
  const catPreds = preds.filter((p) => !p.numeric);
  const writer = new BlockWriter(plannedVersionId, { num: numPreds.map((p) => p.name), cat: catPreds.map((p) => p.name), sub: subs.map((s) => s.name) });
  const numVals = new Float64Array(numPreds.length);
  const catVals = new Array(catPreds.length);
  const subVals = new Array(subs.length);
  const catIntern = catPreds.map(() => new Interner());
  const subIntern = subs.map(() => new Interner());
  const outcomeIntern = new Interner();
  const dateIntern = new Interner();
  const outcomeOf = /* @__PURE__ */ new Map();
  const slot = preds.map((p) => (p.numeric ? numPreds : catPreds).indexOf(p));
  const periodCache = /* @__PURE__ */ new Map();
  let rowsRead = 0, accepted = 0, rejectedRows = 0, events = 0;
  let minDate = null, maxDate = null;
  const reasonCounts = /* @__PURE__ */ new Map();
  const rejections = [];
  let bytesRead = 0;
  let refusal = null;
  const reject = (line, column, value, reason, kind) => {
    reasonCounts.set(kind, (reasonCounts.get(kind) ?? 0) + 1);
    if (rejections.length < MAX_STORED_REJECTIONS) rejections.push([line, column, value.slice(0, 500), reason]);
  };
  const NEXT = 0, STOP = 1, FLUSH = 2;
  const checkRow = (record, line) => {
    rowsRead++;
    if (record.length !== headers.length) {
      reject(line, "(row)", "", `the row has ${record.length} fields; the header has ${headers.length}`, "wrong number of fields");
      rejectedRows++;
      return NEXT;
    }
    let bad = false;
    for (let j = 0; j < mappedIdx.length; j++) {
      const i = mappedIdx[j];
      const cells = cellIntern[j];
      const v = cells ? record[i] = cells.intern(record[i]) : record[i];
      const verdict = cells ? cells.verdict : judgeNumber(j, v);
      if (verdict === CLEAN) continue;
      if (verdict.hit) {
        refusal = { column: headers[i], category: verdict.hit.category, reason: `${verdict.hit.reason} (line ${line})` };
        return STOP;
      }
      if (verdict.name) {
        const seen = names[j].get(v);
        if (seen) seen.count++;
        else if (names[j].size >= 1e4) {
          refusal = { column: headers[i], category: "names", reason: `holds thousands of distinct values that look like personal names (line ${line})` };
          return STOP;
        } else names[j].set(v, { count: 1, line });
      }
      if (verdict.formula) {
        reject(line, headers[i], v.trim(), "the cell looks like a spreadsheet formula", "formula-looking cell");
        bad = true;
      }
    }
    if (bad) {
      rejectedRows++;
      return NEXT;
    }
    for (let k = 0; k < preds.length; k++) {
      const p = preds[k];
      const raw = record[p.idx].trim();
      if (raw === "") {
        reject(line, p.fileCol, raw, `missing value for ${p.name}`, `missing ${p.name}`);
        bad = true;
        continue;
      }
      if (p.numeric) {
        let x = parseDecimal(raw);
        if (p.age && raw === "90+") x = 90;
        else if (p.age && ageOver89(raw)) {
          refusal = { column: p.fileCol, category: "ages over 89", reason: `holds an age over 89 (line ${line}); group them as "90+"` };
          return STOP;
        }
        if (!Number.isFinite(x)) {
          reject(line, p.fileCol, raw, `${p.name} must be a decimal number`, `non-numeric ${p.name}`);
          bad = true;
          continue;
        }
        if (x < p.min || x > p.max) {
          reject(line, p.fileCol, raw, `${p.name} must be between ${p.min} and ${p.max}`, `${p.name} out of range`);
          bad = true;
          continue;
        }
        if (p.positiveOnly && x <= 0) {
          reject(line, p.fileCol, raw, `${p.name} enters the score as a logarithm and must be above 0`, `${p.name} not above 0`);
          bad = true;
          continue;
        }
        numVals[slot[k]] = x;
      } else {
        const v = catIntern[slot[k]].intern(raw);
        catVals[slot[k]] = v;
      }
    }
    const yRaw = outcomeIntern.intern(record[outcomeIdx].trim());
    let y = outcomeOf.get(yRaw);
    if (y === void 0) {
      const yl = yRaw.toLowerCase();
      y = pos.has(yl) ? 1 : neg.has(yl) ? 0 : -1;
      if (outcomeOf.size < 1e3) outcomeOf.set(yRaw, y);
    }
    if (y < 0) {
      reject(line, mapping2.outcome.column, yRaw, yRaw === "" ? "missing outcome" : `the outcome must be one of ${[...pos, ...neg].join(", ")}`, yRaw === "" ? "missing outcome" : "outcome not a known label");
      bad = true;
    }
    let date = null;
    if (dateIdx >= 0) {
      const d = dateIntern.intern(record[dateIdx].trim());
      if (d !== "") {
        date = periodCache.get(d) ?? null;
        if (date === null && !periodCache.has(d)) {
          date = periodStart(d);
          if (periodCache.size < 1e4) periodCache.set(d, date);
        }
        if (!date) {
          reject(line, mapping2.date.column, d, "the period must be YYYY-MM, YYYY-Qn or YYYY", "unreadable period");
          bad = true;
        }
      }
    }
    if (bad) {
      rejectedRows++;
      return NEXT;
    }
    for (let k = 0; k < subs.length; k++) {
      const v = record[subs[k].idx].trim();
      subVals[k] = v === "" ? null : subIntern[k].intern(v);
    }
    return accept(line, y, date);
  };
  const accept = (line, y, date) => {
    for (let k = 0; k < subs.length; k++) subAcc[k].add(subVals[k]);
    for (let k = 0; k < preds.length; k++) predAcc[k].add(preds[k].numeric ? numVals[slot[k]] : catVals[slot[k]]);
    outcomeAcc.add(y === 1 ? "1" : "0");
    if (dateAcc) dateAcc.add(date);
    if (date) {
      if (!minDate || date < minDate) minDate = date;
      if (!maxDate || date > maxDate) maxDate = date;
    }
    accepted++;
    events += y;
    writer.add(line, y, date, numVals, catVals, subVals);
    return writer.full ? FLUSH : NEXT;
  };
  let first = true;
  let nextLine = 1;
  let lastProgress = 0;
  const progress = () => {
    if (rowsRead - lastProgress < 2e4) return;
    lastProgress = rowsRead;
    sink.progress(Math.min(0.99, bytesRead / Math.max(1, input.totalBytes)), rowsRead, rejectedRows);
  };
  const batches = csvBatches(input.path, input.delimiter, (b) => bytesRead = b);
  try {
    outer: for await (const records of batches) {
      for (const record of records) {
        const line = nextLine;
        nextLine += 1 + extraLines(record);
        if (isEmptyRecord(record)) continue;
        if (first) {
          first = false;
          continue;
        }
        const r = checkRow(record, line);
        if (r === STOP) break outer;
        if (r === FLUSH) await sink.rows(writer.flush());
      }
      progress();
    }
    for (let j = 0; j < mappedIdx.length && !refusal; j++) {
      for (const { count, line } of names[j].values()) {
        if (count < 3) {
          refusal = { column: headers[mappedIdx[j]], category: "names", reason: `holds a value that looks like a personal name in fewer than three rows (line ${line}); merge rare levels or remove names` };
          break;
        }
      }
    }
    if (!refusal) {
      if (writer.pending) await sink.rows(writer.flush());
      await sink.rows(writer.end());
    }
  } finally {
    await batches.return(void 0);
  }
  return {
    refusal,
    rowsRead,
    accepted,
    rejectedRows,
    events,
    reasonCounts: [...reasonCounts.entries()].map(([reason, count]) => ({ reason, count })),
    columnSummary: Object.fromEntries([...summaries.entries()].map(([k, a]) => [k, a.summary()])),
    eventPeriod: minDate ? { min: minDate, max: maxDate } : null,
    rejections
  };
}

// tests/tmpprof.ts
var HEADER = ["age", "length_of_stay", "prior_admissions", "emergency_admission", "charlson_index", "readmitted_30d", "discharge_date", "sex", "age_band", "unit", "site", "ward_moves"];
var mapping = {
  predictors: { age: "age", length_of_stay: "length_of_stay", prior_admissions: "prior_admissions", emergency_admission: "emergency_admission", charlson_index: "charlson_index" },
  outcome: { column: "readmitted_30d", positive: ["yes"], negative: ["no"] },
  date: { column: "discharge_date" },
  subgroups: { sex: "sex", age_band: "age_band", unit: "unit", site: "site" },
  ranges: {}
};
var predictors = [{ column: "age", kind: "numeric", positiveOnly: false }, { column: "length_of_stay", kind: "numeric", positiveOnly: true }, { column: "prior_admissions", kind: "numeric", positiveOnly: false }, { column: "emergency_admission", kind: "text", positiveOnly: false }, { column: "charlson_index", kind: "numeric", positiveOnly: false }];
for (let k = 0; k < 3; k++) {
  const t = performance.now();
  const c0 = process.cpuUsage();
  const r = await checkUploadRows({ path: "/tmp/csvh/ingest.csv", delimiter: ",", headers: HEADER, mapping, predictors, supplied: false, plannedVersionId: "0b7c5d0e-1f2a-4b3c-8d4e-5f6a7b8c9d0e", totalBytes: 1 }, { rows: () => {
  }, progress: () => {
  } });
  const c = process.cpuUsage(c0);
  console.log("check", r.accepted, (performance.now() - t).toFixed(0), "ms wall", ((c.user + c.system) / 1e3).toFixed(0), "ms cpu");
}
