// Pool task of the cohort row browser (jobs/threads/pool.ts runs it in a pool of one thread, so what it keeps is shared by
// every request): loads a stored cohort version through its own PostgreSQL connection, and sorts or searches it once
// per (version, key, direction) or (version, search); each page request then only slices. Stored versions never
// change, so what this thread keeps is never stale, whatever other processes do. Bounded by the rows it holds; least
// recently used versions go first.
import pg from 'pg';
import { config } from '../../platform/config';
import { loadCohortData, type CohortData, type Query } from '../../domain/cohorts/cohortData';
import { rowPeriodLabel, type PeriodKind } from '@shared/periods';

export interface RowsRequest {
  cohortVersionId: string;
  rowCount: number;
  sortBy: string;
  sortDir: 'asc' | 'desc';
  search?: string;
  /** The kind of period every row's start date begins, so a search for 2026-Q2 finds that quarter's rows. */
  periodKind?: PeriodKind | null;
  /** Each start date's uploaded label, for a version whose file mixed kinds of period. */
  periodLabels?: Record<string, string> | null;
  page: number;
  pageSize: number;
}

export interface BrowsedRow {
  lineNo: number;
  outcome: number;
  eventDate: string | null;
  predictors: Record<string, number | string | null>;
  subgroups: Record<string, string | null>;
}

export type RowsAnswer = { ok: true; rows: BrowsedRow[]; total: number } | { ok: false; message: string };

const MAX_ROWS_HELD = 2_000_000;
const MAX_ORDERS_PER_VERSION = 12;

interface Held {
  data: Promise<CohortData>;
  n: number;
  /** Row positions in display order, per "sortBy|dir" or "search|sortBy|dir". */
  orders: Map<string, Promise<Int32Array>>;
}

const held = new Map<string, Held>();
let pool: pg.Pool | null = null;
// This thread's own connections, opened with its first request.
const query: Query = async (sql, params) => {
  if (!pool) {
    pool = new pg.Pool({ ...config.db, max: 2, application_name: 'plumbline row browser' });
    pool.on('error', () => undefined);
  }
  return (await pool.query(sql, params as unknown[])).rows;
};

function version(id: string, n: number): Held {
  let h = held.get(id);
  held.delete(id);
  if (!h) {
    h = { data: loadCohortData(id, query), n, orders: new Map() };
    const failed = h;
    h.data.catch(() => held.get(id) === failed && held.delete(id));
  }
  held.set(id, h); // most recently used last
  let total = [...held.values()].reduce((s, e) => s + e.n, 0);
  for (const [key, e] of held) {
    if (total <= MAX_ROWS_HELD || key === id) break;
    held.delete(key);
    total -= e.n;
  }
  return h;
}

const collator = new Intl.Collator();

function sortedOrder(data: CohortData, sortBy: string, dir: 'asc' | 'desc', subset?: Int32Array): Int32Array {
  let key: (i: number) => number | string | null;
  if (sortBy === 'line_no') key = (i) => data.lineNo[i];
  else if (sortBy === 'outcome') key = (i) => data.outcome[i];
  else if (sortBy === 'event_date') key = (i) => data.eventDate[i];
  else if (data.columns[sortBy]) {
    const col = data.columns[sortBy];
    key = (i) => col[i] ?? null;
  } else {
    const col = data.subgroups[sortBy] ?? [];
    key = (i) => col[i] ?? null;
  }
  const idx = subset ? Array.from(subset) : Array.from({ length: data.n }, (_, i) => i);
  const sign = dir === 'asc' ? 1 : -1;
  idx.sort((a, b) => {
    const x = key(a);
    const y = key(b);
    if (x !== y) {
      if (x === null) return 1; // missing values last either way
      if (y === null) return -1;
      const c = typeof x === 'number' && typeof y === 'number' ? x - y : collator.compare(String(x), String(y));
      if (c !== 0) return sign * c;
    }
    return data.lineNo[a] - data.lineNo[b];
  });
  return Int32Array.from(idx);
}

function matching(
  data: CohortData,
  needle: string,
  periodKind: PeriodKind | null,
  periodLabels: Record<string, string> | null,
): Int32Array {
  const cols = [...Object.values(data.columns), ...Object.values(data.subgroups)];
  const out: number[] = [];
  // A period is searched as the rows show it (2026-Q2) and as its stored first day.
  const periods = new Map<string, string>();
  const periodText = (start: string) =>
    periods.get(start) ??
    periods.set(start, `${rowPeriodLabel(start, periodKind, periodLabels)} ${start}`.toLowerCase()).get(start)!;
  for (let i = 0; i < data.n; i++) {
    const start = data.eventDate[i];
    if (
      String(data.lineNo[i]) === needle ||
      (start !== null && periodText(start).includes(needle)) ||
      cols.some((c) => c[i] !== null && c[i] !== undefined && String(c[i]).toLowerCase().includes(needle))
    )
      out.push(i);
  }
  return Int32Array.from(out);
}

async function answer(r: RowsRequest): Promise<RowsAnswer> {
  const h = version(r.cohortVersionId, r.rowCount);
  const data = await h.data;
  const needle = r.search?.trim().toLowerCase() || '';
  const key = `${needle}|${r.periodKind ?? ''}|${r.periodLabels ? 'labels' : ''}|${r.sortBy}|${r.sortDir}`;
  let order = h.orders.get(key);
  if (!order) {
    order = Promise.resolve().then(() =>
      sortedOrder(
        data,
        r.sortBy,
        r.sortDir,
        needle ? matching(data, needle, r.periodKind ?? null, r.periodLabels ?? null) : undefined,
      ),
    );
    h.orders.set(key, order);
    if (h.orders.size > MAX_ORDERS_PER_VERSION) h.orders.delete(h.orders.keys().next().value!);
  }
  const idx = await order;
  const page = idx.subarray((r.page - 1) * r.pageSize, r.page * r.pageSize);
  const rows = Array.from(page, (i) => ({
    lineNo: data.lineNo[i],
    outcome: data.outcome[i],
    eventDate: data.eventDate[i],
    predictors: Object.fromEntries(Object.entries(data.columns).map(([k, c]) => [k, c[i]])),
    subgroups: Object.fromEntries(
      Object.entries(data.subgroups)
        .filter(([, c]) => c[i] !== null)
        .map(([k, c]) => [k, c[i]]),
    ),
  }));
  return { ok: true, rows, total: idx.length };
}

/** The pool task: one page of rows, or why they could not be read. */
export async function rows(r: RowsRequest): Promise<RowsAnswer> {
  try {
    return await answer(r);
  } catch (err) {
    return { ok: false, message: (err as Error).message ?? String(err) };
  }
}
