// The full pass over an uploaded file, once the steward has mapped its columns: every row is checked (fields, types,
// ranges, outcome labels, periods, formula-looking cells, identifiers the screen's sample did not show), the accepted
// rows are encoded for PostgreSQL's COPY, and each column is summarised. No database access here: the caller (the
// upload worker thread) decides where rows and rejections go, so this stays a plain function the tests can call.
import type { ColumnMappingSpec, ColumnSummary, ScreenFinding } from '@shared/cohorts';
import { csvBatches, LineNumbers, type Delimiter } from './csvFile';
import { parseDecimal } from '@shared/decimal';
import { parsePeriod, comparePeriodLabels, type Period, type PeriodKind } from '@shared/periods';
import { BlockWriter } from './cohortBlocks';
import { ageOver89, cellRules, isAgeHeader, looksLikeFormula, personName, type CellHit } from './deidentify';
import type { MissingnessSummary } from '@shared/missingness';
import { MissingnessCounter } from './missingness';

export const MAX_STORED_REJECTIONS = 100_000;
const RESERVOIR = 5000;

export interface RequiredPredictor {
  column: string;
  kind: 'numeric' | 'text';
  positiveOnly: boolean;
}

export interface CheckInput {
  path: string;
  delimiter: Delimiter;
  headers: string[];
  mapping: ColumnMappingSpec;
  predictors: RequiredPredictor[];
  /** "supplied probability" score versions: the one predictor is a probability in [0, 1]. */
  supplied: boolean;
  /** The id the cohort version will get; every COPY row carries it. */
  plannedVersionId: string;
  totalBytes: number;
}

export type Rejection = [line: number, column: string, value: string, reason: string];

export interface CheckSink {
  /** Binary COPY data for cohort_row_blocks (domain/cohorts/cohortBlocks.ts): the signature, one row per block, the trailer. */
  rows(copy: Buffer): Promise<void> | void;
  progress(fraction: number, rowsRead: number, rowsRejected: number): void;
}

export interface CheckResult {
  refusal: ScreenFinding | null;
  rowsRead: number;
  accepted: number;
  rejectedRows: number;
  events: number;
  reasonCounts: { reason: string; count: number }[];
  columnSummary: Record<string, ColumnSummary>;
  /** min/max: the earliest and latest period start; end: the last day of the latest-ending period; kind: the
   * uploaded labels' kind when they all share one (rows then show their label), else null. */
  eventPeriod: {
    min: string;
    max: string;
    end: string;
    kind: PeriodKind | null;
    /** Each start date's uploaded label, when the file mixes kinds (months and quarters) and no start has two labels. */
    labels?: Record<string, string> | null;
  } | null;
  /** The first MAX_STORED_REJECTIONS rejected cells, in line order. */
  rejections: Rejection[];
  /** Missing values of the accepted rows: per column, subgroup level and period, and predictors missing together. */
  missingness: MissingnessSummary;
}

class Accumulator {
  n = 0;
  missing = 0;
  numeric = 0;
  min = Infinity;
  max = -Infinity;
  sum = 0;
  reservoir: number[] = [];
  // The first few levels are counted in arrays (cells arrive as canonical copies, so === is mostly a pointer test).
  private readonly fewLevels: string[] = [];
  private readonly fewCounts: number[] = [];
  private readonly moreLevels = new Map<string, number>();
  private seed = 0x9e3779b9;
  // Algorithm L (Li 1994, "Reservoir-sampling algorithms of time complexity O(n(1 + log(N/n)))"): once the reservoir
  // is full, the number of values to skip is drawn, instead of one draw per value.
  private w = 1;
  private nextPick = 0;
  /** inTimeOrder: levels are periods, listed forwards in time rather than by count. */
  constructor(
    public readonly asNumber: boolean,
    private readonly inTimeOrder = false,
  ) {}
  /** xorshift32 in (0, 1): a seeded reservoir keeps the histogram reproducible for the same file. */
  private rand() {
    this.seed ^= this.seed << 13;
    this.seed ^= this.seed >>> 17;
    this.seed ^= this.seed << 5;
    return ((this.seed >>> 0) + 1) / 4294967297;
  }
  private skip() {
    this.w *= Math.exp(Math.log(this.rand()) / RESERVOIR);
    this.nextPick += Math.floor(Math.log(this.rand()) / Math.log(1 - this.w)) + 1;
  }
  add(v: string | number | null) {
    // NaN: a numeric predictor's gap (the steward allowed it), stored as missing.
    if (v === null || v === '' || (typeof v === 'number' && Number.isNaN(v))) {
      this.missing++;
      return;
    }
    this.n++;
    if (this.asNumber && typeof v === 'number') {
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
    for (let k = 0; k < few.length; k++)
      if (few[k] === s) {
        this.fewCounts[k]++;
        return;
      }
    if (few.length < 16) {
      few.push(s);
      this.fewCounts.push(1);
      return;
    }
    const c = this.moreLevels.get(s);
    if (c !== undefined) this.moreLevels.set(s, c + 1);
    else if (few.length + this.moreLevels.size < 1000) this.moreLevels.set(s, 1);
  }
  summary(): ColumnSummary {
    if (this.asNumber) {
      const bins = 20;
      const histogram: { from: number; to: number; count: number }[] = [];
      if (this.numeric > 0) {
        const width = this.max > this.min ? (this.max - this.min) / bins : 1;
        for (let b = 0; b < bins; b++)
          histogram.push({ from: this.min + b * width, to: this.min + (b + 1) * width, count: 0 });
        const scale = this.numeric / this.reservoir.length;
        for (const v of this.reservoir) histogram[Math.min(bins - 1, Math.floor((v - this.min) / width))].count++;
        if (scale !== 1) for (const h of histogram) h.count = Math.round(h.count * scale);
      }
      return {
        kind: 'numeric',
        n: this.n,
        missing: this.missing,
        min: this.numeric ? this.min : null,
        max: this.numeric ? this.max : null,
        mean: this.numeric ? this.sum / this.numeric : null,
        histogram,
        histogramSampled: this.numeric > RESERVOIR,
      };
    }
    const counted: [string, number][] = this.fewLevels.map((l, k) => [l, this.fewCounts[k]]);
    const sorted = [...counted, ...this.moreLevels.entries()].sort(
      this.inTimeOrder ? (a, b) => comparePeriodLabels(a[0], b[0]) : (a, b) => b[1] - a[1],
    );
    return {
      kind: 'categorical',
      n: this.n,
      missing: this.missing,
      levels: sorted.slice(0, 50).map(([value, count]) => ({ value, count })),
      otherLevels: Math.max(0, sorted.length - 50),
    };
  }
}

/** Turns a period cell (YYYY-MM, YYYY-Qn, YYYY-Hn, YYYY) into the first day of the period, or null when unreadable. */
export function periodStart(raw: string): string | null {
  return parsePeriod(raw)?.start ?? null;
}

/**
 * Canonical copies of a column's repeating values. A cell split from the file is a fresh string whose hash V8 must
 * compute on every Map lookup; a few levels are found by comparing against the canonical copies instead, whose hashes
 * are cached, so the summaries and the block encoding that follow look them up cheaply. Bounded: past 50,000
 * distinct values a column's cells are used as they come.
 */
type Verdict = { formula: boolean; hit: CellHit | null; name: boolean };
const CLEAN: Verdict = { formula: false, hit: null, name: false };

class Interner {
  private readonly few: string[] = [];
  private readonly fewVerdicts: Verdict[] = [];
  private readonly many = new Map<string, [string, Verdict]>();
  /** The verdict of the value last interned (judged once per distinct value). */
  verdict: Verdict = CLEAN;
  constructor(private readonly judge: (v: string) => Verdict = () => CLEAN) {}
  intern(v: string): string {
    const few = this.few;
    for (let i = 0; i < few.length; i++)
      if (few[i] === v) {
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
    if (hit !== undefined) {
      this.verdict = hit[1];
      return hit[0];
    }
    this.verdict = this.judge(v);
    if (this.many.size < 50_000) this.many.set(v, [v, this.verdict]);
    return v;
  }
}

/** Short cells of digits and points: no identifier rule can match them (every number rule needs 5+ digits; deidentify.ts). */
function shortPlainNumber(v: string): boolean {
  if (v.length > 4) return false;
  for (let i = 0; i < v.length; i++) {
    const c = v.charCodeAt(i);
    if ((c < 48 || c > 57) && c !== 46) return false;
  }
  return v.length > 0;
}

export async function checkUploadRows(input: CheckInput, sink: CheckSink): Promise<CheckResult> {
  const { headers, mapping, plannedVersionId } = input;
  const col = (name: string) => headers.indexOf(name);
  const preds = input.predictors.map((p) => {
    const fileCol = mapping.predictors[p.column];
    const range = mapping.ranges[p.column] ?? {};
    const age = /^age/i.test(p.column) || isAgeHeader(fileCol);
    const prob = input.supplied;
    return {
      name: p.column,
      fileCol,
      idx: col(fileCol),
      numeric: p.kind === 'numeric',
      positiveOnly: p.positiveOnly,
      age,
      labels: mapping.labels?.[p.column] ? new Map(Object.entries(mapping.labels[p.column])) : null,
      // An empty cell is a gap (stored as missing), not a rejection, where the steward allowed gaps.
      gaps: (mapping.predictorsWithGaps ?? []).includes(p.column),
      min: range.min ?? (age ? 0 : prob ? 0 : -Infinity),
      max: range.max ?? (age ? 120 : prob ? 1 : Infinity),
    };
  });
  const outcomeIdx = col(mapping.outcome.column);
  const pos = new Set(mapping.outcome.positive.map((s) => s.trim().toLowerCase()));
  const neg = new Set(mapping.outcome.negative.map((s) => s.trim().toLowerCase()));
  const dateIdx = mapping.date ? col(mapping.date.column) : -1;
  const subs = Object.entries(mapping.subgroups).map(([name, c]) => ({ name, idx: col(c), fileCol: c }));
  const summaries = new Map<string, Accumulator>();
  for (const p of preds) summaries.set(p.name, new Accumulator(p.numeric));
  summaries.set(`outcome (${mapping.outcome.column})`, new Accumulator(false));
  if (mapping.date) summaries.set(`period (${mapping.date.column})`, new Accumulator(false, true));
  for (const s of subs) summaries.set(s.name, new Accumulator(false));
  const predAcc = preds.map((p) => summaries.get(p.name)!);
  const outcomeAcc = summaries.get(`outcome (${mapping.outcome.column})`)!;
  const dateAcc = mapping.date ? summaries.get(`period (${mapping.date.column})`)! : null;
  const subAcc = subs.map((s) => summaries.get(s.name)!);
  const mappedIdx = [
    ...new Set([...preds.map((p) => p.idx), outcomeIdx, dateIdx, ...subs.map((s) => s.idx)].filter((i) => i >= 0)),
  ];
  // Numeric predictors take many values (checked cell by cell); the other mapped columns repeat a few levels.
  const numericIdx = new Set(preds.filter((p) => p.numeric).map((p) => p.idx));
  const labelIdx = new Set([...preds.filter((p) => !p.numeric).map((p) => p.idx), ...subs.map((s) => s.idx)]);
  // Every cell of every mapped column goes through the full rule set for its column (deidentify.ts, cellRules). A
  // six-digit calendar day is an ordinary value only inside a numeric predictor's stated plausible range.
  const sixDigitRange = (i: number) => {
    const p = preds.find((q) => q.idx === i && q.numeric);
    if (!p || labelIdx.has(i) || i === outcomeIdx || i === dateIdx || !Number.isFinite(p.max)) return null;
    return { min: p.min, max: p.max };
  };
  const judgeFor = (i: number) => {
    const rule = cellRules(headers[i], labelIdx.has(i) && !numericIdx.has(i) ? 'label' : 'number', {
      sixDigitRange: sixDigitRange(i),
    });
    return (raw: string): Verdict => {
      const v = raw.trim();
      const formula = looksLikeFormula(v);
      const hit = rule(v);
      const name = !hit && personName(v);
      return formula || hit || name ? { formula, hit, name } : CLEAN;
    };
  };
  const judges = mappedIdx.map(judgeFor);
  const cellIntern = mappedIdx.map((i, j) => (numericIdx.has(i) ? null : new Interner(judges[j])));
  // Numeric cells repeat too (ages, days): each distinct one is judged once, in a bounded cache.
  const numberVerdicts = mappedIdx.map(() => new Map<string, Verdict>());
  const judgeNumber = (j: number, v: string): Verdict => {
    if (shortPlainNumber(v)) return CLEAN;
    const cache = numberVerdicts[j];
    let verdict = cache.get(v);
    if (verdict === undefined) {
      verdict = judges[j](v);
      if (cache.size >= 50_000) cache.clear();
      cache.set(v, verdict);
    }
    return verdict;
  };

  const numPreds = preds.filter((p) => p.numeric);
  const catPreds = preds.filter((p) => !p.numeric);
  const writer = new BlockWriter(plannedVersionId, {
    num: numPreds.map((p) => p.name),
    cat: catPreds.map((p) => p.name),
    sub: subs.map((s) => s.name),
  });
  const numVals = new Float64Array(numPreds.length);
  const catVals: (string | null)[] = new Array(catPreds.length);
  const gapFlags = new Uint8Array(preds.length);
  const missing = new MissingnessCounter({
    predictors: preds.map((p) => p.name),
    gapsAllowed: preds.filter((p) => p.gaps).map((p) => p.name),
    subgroups: subs.map((s) => s.name),
    period: mapping.date ? `period (${mapping.date.column})` : null,
  });
  const subVals: (string | null)[] = new Array(subs.length);
  const catIntern = catPreds.map(() => new Interner());
  const subIntern = subs.map(() => new Interner());
  const outcomeIntern = new Interner();
  const dateIntern = new Interner();
  const outcomeOf = new Map<string, number>();
  // Slot of each predictor in numVals / catVals.
  const slot = preds.map((p) => (p.numeric ? numPreds : catPreds).indexOf(p));
  const periodCache = new Map<string, Period | null>();
  let rowsRead = 0,
    accepted = 0,
    rejectedRows = 0,
    events = 0;
  let minDate: string | null = null,
    maxDate: string | null = null,
    endDate: string | null = null;
  const periodKinds = new Set<PeriodKind>();
  const labelOfStart = new Map<string, string>();
  let startWithTwoLabels = false;
  const reasonCounts = new Map<string, number>();
  const rejections: Rejection[] = [];
  let bytesRead = 0;
  let refusal: ScreenFinding | null = null;
  const reject = (line: number, column: string, value: string, reason: string, kind: string) => {
    reasonCounts.set(kind, (reasonCounts.get(kind) ?? 0) + 1);
    if (rejections.length < MAX_STORED_REJECTIONS) rejections.push([line, column, value.slice(0, 500), reason]);
  };

  const NEXT = 0,
    STOP = 1,
    FLUSH = 2;
  /** One data record: checked, summarised and added to the block writer, or rejected; STOP when the file is refused. */
  const checkRow = (record: string[], line: number): number => {
    rowsRead++;
    if (record.length !== headers.length) {
      // Only the line number and the reason: the row's text (and any extra field) is never kept.
      reject(
        line,
        '(row)',
        '',
        `the row has ${record.length} fields; the header has ${headers.length}`,
        'wrong number of fields',
      );
      rejectedRows++;
      return NEXT;
    }
    let bad = false;
    for (let j = 0; j < mappedIdx.length; j++) {
      const i = mappedIdx[j];
      const cells = cellIntern[j];
      // Repeating columns: each distinct value is judged once; the canonical copy replaces the cell.
      const v = cells ? (record[i] = cells.intern(record[i])) : record[i];
      const verdict = cells ? cells.verdict : judgeNumber(j, v);
      if (verdict === CLEAN) continue;
      if (verdict.hit) {
        refusal = {
          column: headers[i],
          category: verdict.hit.category,
          reason: `${verdict.hit.reason} (line ${line})`,
        };
        return STOP;
      }
      // A person's name refuses wherever it is and however often it repeats (a patient with several stays repeats too).
      if (verdict.name) {
        refusal = {
          column: headers[i],
          category: 'names',
          reason: `holds a value that looks like a personal name (line ${line}); recode the label or remove names`,
        };
        return STOP;
      }
      if (verdict.formula) {
        reject(line, headers[i], v.trim(), 'the cell looks like a spreadsheet formula', 'formula-looking cell');
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
      gapFlags[k] = 0;
      if (raw === '' && p.gaps) {
        gapFlags[k] = 1;
        if (p.numeric) numVals[slot[k]] = NaN;
        else catVals[slot[k]] = null;
        continue;
      }
      if (raw === '') {
        reject(line, p.fileCol, raw, `missing value for ${p.name}`, `missing ${p.name}`);
        bad = true;
        continue;
      }
      if (p.numeric) {
        // Decimal notation only: Number() would also read 0x10, 0b1, 1e3 and Infinity.
        let x = parseDecimal(raw);
        if (p.age && raw === '90+')
          x = 90; // the Safe Harbor grouping of ages over 89 enters the formula as 90
        else if (p.age && ageOver89(raw)) {
          refusal = {
            column: p.fileCol,
            category: 'ages over 89',
            reason: `holds an age over 89 (line ${line}); group them as "90+"`,
          };
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
          reject(
            line,
            p.fileCol,
            raw,
            `${p.name} enters the score as a logarithm and must be above 0`,
            `${p.name} not above 0`,
          );
          bad = true;
          continue;
        }
        numVals[slot[k]] = x;
      } else {
        const v = catIntern[slot[k]].intern(raw);
        // The steward's confirmed reading of a label (Y → yes) is what is stored; '' keeps the label ("not the level").
        const read = p.labels === null ? undefined : p.labels.get(v);
        catVals[slot[k]] = read ? read : v;
      }
    }
    const yRaw = outcomeIntern.intern(record[outcomeIdx].trim());
    let y = outcomeOf.get(yRaw);
    if (y === undefined) {
      const yl = yRaw.toLowerCase();
      y = pos.has(yl) ? 1 : neg.has(yl) ? 0 : -1;
      if (outcomeOf.size < 1000) outcomeOf.set(yRaw, y);
    }
    if (y < 0) {
      reject(
        line,
        mapping.outcome.column,
        yRaw,
        yRaw === '' ? 'missing outcome' : `the outcome must be one of ${[...pos, ...neg].join(', ')}`,
        yRaw === '' ? 'missing outcome' : 'outcome not a known label',
      );
      bad = true;
    }
    let date: Period | null = null;
    if (dateIdx >= 0) {
      const d = dateIntern.intern(record[dateIdx].trim());
      if (d !== '') {
        date = periodCache.get(d) ?? null;
        if (date === null && !periodCache.has(d)) {
          date = parsePeriod(d);
          if (periodCache.size < 10_000) periodCache.set(d, date);
        }
        if (!date) {
          reject(
            line,
            mapping.date!.column,
            d,
            'the period must be YYYY-MM, YYYY-Qn, YYYY-Hn or YYYY',
            'unreadable period',
          );
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
      subVals[k] = v === '' ? null : subIntern[k].intern(v);
    }
    return accept(line, y, date);
  };
  /** An accepted row, its values in `numVals`, `catVals` and `subVals`: summarised and added to the blocks. */
  const accept = (line: number, y: number, period: Period | null): number => {
    const date = period ? period.start : null;
    for (let k = 0; k < subs.length; k++) subAcc[k].add(subVals[k]);
    // Numbers are read from the typed array (a generic array would box each one).
    for (let k = 0; k < preds.length; k++) predAcc[k].add(preds[k].numeric ? numVals[slot[k]] : catVals[slot[k]]);
    outcomeAcc.add(y === 1 ? '1' : '0');
    // The summary keeps the label as uploaded (2026-Q2), not the first day it is stored as.
    if (dateAcc) dateAcc.add(period ? period.label : null);
    missing.add(gapFlags, subVals, period ? period.label : null, y);
    if (period) {
      if (!minDate || period.start < minDate) minDate = period.start;
      if (!maxDate || period.start > maxDate) maxDate = period.start;
      if (!endDate || period.end > endDate) endDate = period.end;
      periodKinds.add(period.kind);
      const seen = labelOfStart.get(period.start);
      if (seen === undefined) labelOfStart.set(period.start, period.label);
      else if (seen !== period.label) startWithTwoLabels = true;
    }
    accepted++;
    events += y;
    writer.add(line, y, date, numVals, catVals, subVals);
    return writer.full ? FLUSH : NEXT;
  };

  let first = true;
  const lines = new LineNumbers();
  let lastProgress = 0;
  const progress = () => {
    if (rowsRead - lastProgress < 20_000) return;
    lastProgress = rowsRead;
    sink.progress(Math.min(0.99, bytesRead / Math.max(1, input.totalBytes)), rowsRead, rejectedRows);
  };
  const batches = csvBatches(input.path, input.delimiter, (b) => (bytesRead = b));
  try {
    outer: for await (const records of batches) {
      for (const record of records) {
        const line = lines.next(record, records.quoted);
        if (!line) continue;
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
    if (!refusal) {
      if (writer.pending) await sink.rows(writer.flush());
      await sink.rows(writer.end());
    }
  } finally {
    await batches.return(undefined);
  }
  return {
    refusal,
    rowsRead,
    accepted,
    rejectedRows,
    events,
    reasonCounts: [...reasonCounts.entries()].map(([reason, count]) => ({ reason, count })),
    columnSummary: Object.fromEntries([...summaries.entries()].map(([k, a]) => [k, a.summary()])),
    eventPeriod: minDate
      ? {
          min: minDate,
          max: maxDate!,
          end: endDate!,
          kind: periodKinds.size === 1 ? [...periodKinds][0] : null,
          labels: periodKinds.size > 1 && !startWithTwoLabels ? Object.fromEntries(labelOfStart) : null,
        }
      : null,
    rejections,
    missingness: missing.summary(),
  };
}
