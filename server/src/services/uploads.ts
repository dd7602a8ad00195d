// Cohort uploads: screen → map and check rows → store (one transaction, COPY) or discard.
import { randomUUID } from 'node:crypto';
import { createReadStream, createWriteStream } from 'node:fs';
import { unlink } from 'node:fs/promises';
import { pipeline } from 'node:stream/promises';
import type { PoolClient } from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import type { ColumnMappingSpec, ColumnSummary, ScreenFinding, UploadFields, UploadStatus, UploadView } from '@shared/cohorts';
import { columnMapping } from '@shared/cohorts';
import type { ScoreModel } from '@shared/model';
import { dataSource } from '../db/dataSource';
import { ScoreVersion } from '../entities/ScoreVersion';
import { badRequest, conflict, HttpError, notFound } from '../middleware/errors';
import type { AuthUser } from '../middleware/auth';
import { appendAudit } from './audit';
import { csvBatches, extraLines, isEmptyRecord, readHeaderAndSample, sniffCsv, type Delimiter } from './csvFile';
import { ageOver89, isAgeHeader, looksLikeFormula, neutraliseCell, screenColumns, valueIdentifier } from './deidentify';

const MAX_STORED_REJECTIONS = 100_000;
const RESERVOIR = 5000;

export interface ReceivedFile {
  path: string;
  originalName: string;
  sha256: string;
  bytes: number;
}

export interface RequiredPredictor {
  column: string;
  kind: 'numeric' | 'text';
  positiveOnly: boolean;
}

/** The columns a score version reads from a cohort, one entry per distinct column. */
export function requiredPredictors(sv: Pick<ScoreVersion, 'mode' | 'model' | 'probabilityColumn'>): RequiredPredictor[] {
  if (sv.mode === 'supplied') return [{ column: sv.probabilityColumn!, kind: 'numeric', positiveOnly: false }];
  const out = new Map<string, RequiredPredictor>();
  for (const p of (sv.model as ScoreModel).predictors) {
    const prev = out.get(p.column) ?? { column: p.column, kind: 'text' as const, positiveOnly: false };
    if (p.transform !== 'indicator') prev.kind = 'numeric';
    if (p.transform === 'log') prev.positiveOnly = true;
    out.set(p.column, prev);
  }
  return [...out.values()];
}

async function loadScoreVersion(id: string): Promise<ScoreVersion> {
  const sv = await dataSource.getRepository(ScoreVersion).findOne({ where: { id } });
  if (!sv) throw notFound('score version');
  return sv;
}

const normName = (s: string) => s.toLowerCase().replace(/[^a-z0-9]/g, '');

/** A first guess the steward corrects: same names, usual outcome and period columns, usual subgroup names. */
export function suggestMapping(headers: string[], sample: string[][], required: RequiredPredictor[]): ColumnMappingSpec {
  const byNorm = new Map(headers.map((h) => [normName(h), h]));
  const find = (...names: string[]) => {
    for (const n of names) if (byNorm.has(normName(n))) return byNorm.get(normName(n))!;
    return headers.find((h) => names.some((n) => normName(h).includes(normName(n))));
  };
  const predictors: Record<string, string> = {};
  for (const r of required) {
    const h = byNorm.get(normName(r.column)) ?? headers.find((x) => normName(x).includes(normName(r.column)));
    if (h) predictors[r.column] = h;
  }
  const outcomeCol = find('outcome', 'readmitted_30d', 'readmitted', 'readmission', 'event', 'died', 'death', 'y') ?? headers[0];
  const idx = headers.indexOf(outcomeCol);
  const levels = new Set(sample.map((r) => (r[idx] ?? '').trim().toLowerCase()).filter(Boolean));
  let positive = ['1'];
  let negative = ['0'];
  if ([...levels].some((l) => l === 'yes' || l === 'no')) [positive, negative] = [['yes'], ['no']];
  else if ([...levels].some((l) => l === 'true' || l === 'false')) [positive, negative] = [['true'], ['false']];
  const dateCol = headers.find((h) => /date|month|quarter|period/i.test(h));
  const subgroups: Record<string, string> = {};
  for (const [name, aliases] of [
    ['sex', ['sex', 'gender']],
    ['age_band', ['age_band', 'ageband', 'age_group']],
    ['unit', ['unit', 'ward']],
    ['site', ['site', 'campus']],
  ] as const) {
    const h = find(...aliases);
    if (h && !Object.values(predictors).includes(h)) subgroups[name] = h;
  }
  return columnMapping.parse({ predictors, outcome: { column: outcomeCol, positive, negative }, date: dateCol ? { column: dateCol } : null, subgroups });
}

async function removeQuietly(path: string | null | undefined) {
  if (path) await unlink(path).catch(() => undefined);
}

const MAX_UPLOAD_COLUMNS = Number(process.env.PLUMBLINE_UPLOAD_MAX_COLUMNS ?? 500);

/** Step 1: screen the received file; refuse (422, file deleted) or keep it as a pending upload. */
export async function createUpload(actor: AuthUser, file: ReceivedFile, fields: UploadFields, ip: string) {
  try {
    const sv = await loadScoreVersion(fields.scoreVersionId);
    if (fields.cohortId) {
      const found = await dataSource.query('SELECT id FROM cohorts WHERE id = $1', [fields.cohortId]);
      if (!found.length) throw notFound('cohort');
    } else {
      const found = await dataSource.query('SELECT id FROM cohorts WHERE lower(name) = lower($1)', [fields.cohortName]);
      if (found.length) throw conflict(`a cohort named "${fields.cohortName}" exists; upload a new version of it instead (cohortId ${found[0].id})`);
    }
    const { delimiter } = await sniffCsv(file.path);
    const { headers, sample } = await readHeaderAndSample(file.path, delimiter);
    // A registry extract has tens of columns; thousands means a wrong file (or a hostile one) — refuse before storing anything.
    if (headers.length > MAX_UPLOAD_COLUMNS) throw new HttpError(422, `the file has ${headers.length} columns; at most ${MAX_UPLOAD_COLUMNS} are accepted`);
    const screen = screenColumns(headers, sample);
    if (screen.refused.length) {
      await appendAudit({
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'cohort.upload.refused',
        targetType: 'cohort_upload',
        sourceIp: ip,
        details: { filename: file.originalName, sha256: file.sha256, columns: screen.refused.map((f) => ({ column: f.column, category: f.category })) },
      });
      throw new HttpError(422, `the file was refused by the de-identification screen: ${screen.refused.length} column(s) look like direct identifiers; nothing was stored`, {
        columns: screen.refused,
      });
    }
    const required = requiredPredictors(sv);
    const suggested = suggestMapping(headers, sample, required);
    const [row] = await dataSource.query(
      `INSERT INTO cohort_uploads (status, cohort_id, cohort_name, score_version_id, label, period_start, period_end, source_filename, temp_path,
         sha256, bytes, delimiter, headers, warnings, suggested_mapping, created_by)
       VALUES ('pending', $1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15) RETURNING id`,
      [fields.cohortId ?? null, fields.cohortId ? null : fields.cohortName, sv.id, fields.label ?? '', fields.periodStart ?? null, fields.periodEnd ?? null,
        file.originalName.slice(0, 255), file.path, file.sha256, file.bytes, delimiter, JSON.stringify(headers), JSON.stringify(screen.warnings), JSON.stringify(suggested), actor.id],
    );
    await appendAudit({
      actorId: actor.id, actorEmail: actor.email, action: 'cohort.upload.received', targetType: 'cohort_upload', targetId: row.id, sourceIp: ip,
      details: { filename: file.originalName, sha256: file.sha256, bytes: file.bytes, columns: headers.length },
    });
    return { upload: await getUpload(row.id), preview: sample.slice(0, 5) };
  } catch (err) {
    await removeQuietly(file.path);
    throw err;
  }
}

interface UploadRow {
  id: string; status: UploadStatus; cohort_id: string | null; cohort_name: string | null; score_version_id: string; label: string;
  period_start: string | null; period_end: string | null; source_filename: string; temp_path: string | null; prepared_path: string | null;
  sha256: string; bytes: string; delimiter: Delimiter; headers: string[]; warnings: ScreenFinding[]; suggested_mapping: ColumnMappingSpec | null;
  mapping: ColumnMappingSpec | null; progress: number; rows_read: number; rows_accepted: number; rows_rejected: number; events: number;
  rejection_counts: { reason: string; count: number }[]; column_summary: Record<string, ColumnSummary>; event_period: { min: string; max: string } | null;
  planned_version_id: string | null; cohort_version_id: string | null; error: string | null; created_by: string | null; created_at: Date;
}

async function uploadRow(id: string): Promise<UploadRow> {
  const rows: UploadRow[] = await dataSource.query(
    `SELECT *, to_char(period_start, 'YYYY-MM-DD') AS period_start, to_char(period_end, 'YYYY-MM-DD') AS period_end FROM cohort_uploads WHERE id = $1`,
    [id],
  );
  if (!rows.length) throw notFound('upload');
  return rows[0];
}

export async function getUpload(id: string): Promise<UploadView> {
  const r = await uploadRow(id);
  const sv = await dataSource.getRepository(ScoreVersion).findOne({ where: { id: r.score_version_id } });
  return {
    id: r.id, status: r.status, cohortId: r.cohort_id, cohortName: r.cohort_name, scoreVersionId: r.score_version_id, label: r.label,
    periodStart: r.period_start, periodEnd: r.period_end, sourceFilename: r.source_filename, sha256: r.sha256, bytes: Number(r.bytes),
    delimiter: r.delimiter, headers: r.headers, warnings: r.warnings, suggestedMapping: r.suggested_mapping, mapping: r.mapping,
    progress: r.progress, rowsRead: r.rows_read, rowsAccepted: r.rows_accepted, rowsRejected: r.rows_rejected, events: r.events,
    rejectionCounts: r.rejection_counts, columnSummary: r.column_summary, cohortVersionId: r.cohort_version_id, error: r.error,
    createdAt: new Date(r.created_at).toISOString(), requiredPredictors: sv ? requiredPredictors(sv) : [],
  };
}

/** Uploads are private to their uploader (and visible to the admin); others get 404, not a hint. */
export async function assertOwner(actor: AuthUser, id: string): Promise<void> {
  const r = await uploadRow(id);
  if (r.created_by !== actor.id && actor.role !== 'admin') throw notFound('upload');
}

// ---- Step 2: mapping and the full pass over the file ----------------------------------------------------------

const running = new Map<string, Promise<void>>();
/** For tests and the seed: resolves when the upload's background pass ends. */
export const whenProcessed = (id: string) => running.get(id) ?? Promise.resolve();

export async function applyMapping(actor: AuthUser, id: string, mapping: ColumnMappingSpec, ip: string, saveAs?: string): Promise<UploadView> {
  const r = await uploadRow(id);
  if (!['pending', 'checked', 'failed'].includes(r.status) || !r.temp_path) throw conflict(`this upload is ${r.status}; mapping is possible only before it is stored`);
  const sv = await loadScoreVersion(r.score_version_id);
  const problems: string[] = [];
  const has = (c: string) => r.headers.includes(c);
  for (const p of requiredPredictors(sv)) {
    const col = mapping.predictors[p.column];
    if (!col) problems.push(`predictor "${p.column}" is not mapped to a file column`);
    else if (!has(col)) problems.push(`predictor "${p.column}": the file has no column "${col}"`);
  }
  for (const k of Object.keys(mapping.predictors)) if (!requiredPredictors(sv).some((p) => p.column === k)) problems.push(`"${k}" is not a predictor of this score version`);
  if (!has(mapping.outcome.column)) problems.push(`outcome: the file has no column "${mapping.outcome.column}"`);
  const pos = mapping.outcome.positive.map((s) => s.toLowerCase());
  if (mapping.outcome.negative.some((n) => pos.includes(n.toLowerCase()))) problems.push('outcome: a label cannot be both positive and negative');
  if (mapping.date && !has(mapping.date.column)) problems.push(`date: the file has no column "${mapping.date.column}"`);
  for (const [name, col] of Object.entries(mapping.subgroups)) if (!has(col)) problems.push(`subgroup "${name}": the file has no column "${col}"`);
  if (problems.length) throw badRequest(`the mapping does not fit this file: ${problems.join('; ')}`, { problems });

  await dataSource.transaction(async (m) => {
    await m.query('DELETE FROM cohort_upload_rejections WHERE upload_id = $1', [id]);
    await m.query(
      `UPDATE cohort_uploads SET status = 'processing', mapping = $2, progress = 0, rows_read = 0, rows_accepted = 0, rows_rejected = 0, events = 0,
         rejection_counts = '[]', column_summary = '{}', error = NULL, updated_at = now() WHERE id = $1`,
      [id, JSON.stringify(mapping)],
    );
    if (saveAs) await m.query('INSERT INTO column_mappings (name, cohort_id, mapping, created_by) VALUES ($1, $2, $3, $4)', [saveAs, r.cohort_id, JSON.stringify(mapping), actor.id]);
    await appendAudit({ actorId: actor.id, actorEmail: actor.email, action: 'cohort.upload.mapped', targetType: 'cohort_upload', targetId: id, sourceIp: ip, details: { mapping, savedAs: saveAs ?? null } }, m);
  });
  await removeQuietly(r.prepared_path);
  const job = processUpload(id, sv, mapping).finally(() => running.delete(id));
  running.set(id, job);
  return getUpload(id);
}

class Accumulator {
  n = 0;
  missing = 0;
  numeric = 0;
  min = Infinity;
  max = -Infinity;
  sum = 0;
  reservoir: number[] = [];
  levels = new Map<string, number>();
  private seed = 0x9e3779b9;
  constructor(public readonly asNumber: boolean) {}
  private rand() {
    // xorshift32: a seeded reservoir keeps the histogram reproducible for the same file.
    this.seed ^= this.seed << 13; this.seed ^= this.seed >>> 17; this.seed ^= this.seed << 5;
    return (this.seed >>> 0) / 4294967296;
  }
  add(v: string | number | null) {
    if (v === null || v === '') { this.missing++; return; }
    this.n++;
    if (this.asNumber && typeof v === 'number') {
      this.numeric++;
      if (v < this.min) this.min = v;
      if (v > this.max) this.max = v;
      this.sum += v;
      if (this.reservoir.length < RESERVOIR) this.reservoir.push(v);
      else { const j = Math.floor(this.rand() * this.numeric); if (j < RESERVOIR) this.reservoir[j] = v; }
    } else {
      const s = String(v);
      if (this.levels.size < 1000 || this.levels.has(s)) this.levels.set(s, (this.levels.get(s) ?? 0) + 1);
    }
  }
  summary(): ColumnSummary {
    if (this.asNumber) {
      const bins = 20;
      const histogram: { from: number; to: number; count: number }[] = [];
      if (this.numeric > 0) {
        const width = this.max > this.min ? (this.max - this.min) / bins : 1;
        for (let b = 0; b < bins; b++) histogram.push({ from: this.min + b * width, to: this.min + (b + 1) * width, count: 0 });
        const scale = this.numeric / this.reservoir.length;
        for (const v of this.reservoir) histogram[Math.min(bins - 1, Math.floor((v - this.min) / width))].count++;
        if (scale !== 1) for (const h of histogram) h.count = Math.round(h.count * scale);
      }
      return { kind: 'numeric', n: this.n, missing: this.missing, min: this.numeric ? this.min : null, max: this.numeric ? this.max : null,
        mean: this.numeric ? this.sum / this.numeric : null, histogram, histogramSampled: this.numeric > RESERVOIR };
    }
    const sorted = [...this.levels.entries()].sort((a, b) => b[1] - a[1]);
    return { kind: 'categorical', n: this.n, missing: this.missing, levels: sorted.slice(0, 50).map(([value, count]) => ({ value, count })), otherLevels: Math.max(0, sorted.length - 50) };
  }
}

const copyText = (s: string) => s.replace(/\\/g, '\\\\');

/** Turns a period cell (YYYY-MM, YYYY-Qn, YYYY) into the first day of the period, or null when unreadable. */
export function periodStart(raw: string): string | null {
  const v = raw.trim();
  let m = /^(\d{4})-(0[1-9]|1[0-2])$/.exec(v);
  if (m) return `${m[1]}-${m[2]}-01`;
  m = /^(\d{4})-?Q([1-4])$/i.exec(v);
  if (m) return `${m[1]}-${String((Number(m[2]) - 1) * 3 + 1).padStart(2, '0')}-01`;
  m = /^(\d{4})$/.exec(v);
  if (m) return `${m[1]}-01-01`;
  return null;
}

const cellIdentifierCache = new Map<string, { category: string; reason: string } | null>();
function cachedIdentifier(v: string) {
  if (v.length < 5) return null;
  let hit = cellIdentifierCache.get(v);
  if (hit === undefined) {
    hit = valueIdentifier(v);
    if (cellIdentifierCache.size > 50_000) cellIdentifierCache.clear();
    cellIdentifierCache.set(v, hit);
  }
  return hit;
}

async function processUpload(id: string, sv: ScoreVersion, mapping: ColumnMappingSpec): Promise<void> {
  const r = await uploadRow(id);
  const headers = r.headers;
  const col = (name: string) => headers.indexOf(name);
  const plannedId = randomUUID();
  const preparedPath = `${r.temp_path}.copy`;
  const out = createWriteStream(preparedPath, { highWaterMark: 1024 * 1024 });
  const preds = requiredPredictors(sv).map((p) => {
    const fileCol = mapping.predictors[p.column];
    const range = mapping.ranges[p.column] ?? {};
    const age = /^age/i.test(p.column) || isAgeHeader(fileCol);
    const prob = sv.mode === 'supplied';
    return {
      key: JSON.stringify(p.column), name: p.column, fileCol, idx: col(fileCol), kind: p.kind, positiveOnly: p.positiveOnly, age,
      min: range.min ?? (age ? 0 : prob ? 0 : -Infinity), max: range.max ?? (age ? 120 : prob ? 1 : Infinity),
    };
  });
  const outcomeIdx = col(mapping.outcome.column);
  const pos = new Set(mapping.outcome.positive.map((s) => s.trim().toLowerCase()));
  const neg = new Set(mapping.outcome.negative.map((s) => s.trim().toLowerCase()));
  const dateIdx = mapping.date ? col(mapping.date.column) : -1;
  const subs = Object.entries(mapping.subgroups).map(([name, c]) => ({ name, key: JSON.stringify(name), idx: col(c), fileCol: c }));
  const summaries = new Map<string, Accumulator>();
  for (const p of preds) summaries.set(p.name, new Accumulator(p.kind === 'numeric'));
  summaries.set(`outcome (${mapping.outcome.column})`, new Accumulator(false));
  if (mapping.date) summaries.set(`period (${mapping.date.column})`, new Accumulator(false));
  for (const s of subs) summaries.set(s.name, new Accumulator(false));
  const predAcc = preds.map((p) => summaries.get(p.name)!);
  const outcomeAcc = summaries.get(`outcome (${mapping.outcome.column})`)!;
  const dateAcc = mapping.date ? summaries.get(`period (${mapping.date.column})`)! : null;
  const subAcc = subs.map((s) => summaries.get(s.name)!);
  const mappedIdx = [...new Set([...preds.map((p) => p.idx), outcomeIdx, dateIdx, ...subs.map((s) => s.idx)].filter((i) => i >= 0))];

  // Subgroup cells and periods repeat a few levels: encode each distinct value once (bounded caches).
  const subJsonCache = subs.map(() => new Map<string, string>());
  const periodCache = new Map<string, string | null>();
  let rowsRead = 0, accepted = 0, rejectedRows = 0, events = 0, stored = 0;
  let minDate: string | null = null, maxDate: string | null = null;
  const reasonCounts = new Map<string, number>();
  let batch: [number, string, string, string][] = [];
  let lastWrite = Date.now();
  let bytesRead = 0;
  const total = Number(r.bytes);
  let refusal: ScreenFinding | null = null;

  const flushRejections = async () => {
    if (!batch.length) return;
    const b = batch;
    batch = [];
    await dataSource.query(
      `INSERT INTO cohort_upload_rejections (upload_id, line_no, column_name, value, reason)
       SELECT $1, * FROM unnest($2::int[], $3::text[], $4::text[], $5::text[])`,
      [id, b.map((x) => x[0]), b.map((x) => x[1]), b.map((x) => x[2].slice(0, 500)), b.map((x) => x[3])],
    );
  };
  const reject = (line: number, column: string, value: string, reason: string, kind: string) => {
    reasonCounts.set(kind, (reasonCounts.get(kind) ?? 0) + 1);
    if (stored < MAX_STORED_REJECTIONS) { batch.push([line, column, value, reason]); stored++; }
  };

  try {
    const batches = csvBatches(r.temp_path!, r.delimiter, (b) => (bytesRead = b));
    let first = true;
    let buffer = '';
    let nextLine = 1;
    outer: for await (const records of batches) for (const record of records) {
      const line = nextLine;
      nextLine += 1 + extraLines(record);
      if (isEmptyRecord(record)) continue;
      if (first) { first = false; continue; }
      rowsRead++;
      let bad = false;
      if (record.length !== headers.length) {
        reject(line, '(row)', record.join(r.delimiter).slice(0, 200), `the row has ${record.length} fields; the header has ${headers.length}`, 'wrong number of fields');
        rejectedRows++;
        continue;
      }
      for (const i of mappedIdx) {
        const v = record[i];
        if (looksLikeFormula(v)) { reject(line, headers[i], v, 'the cell looks like a spreadsheet formula', 'formula-looking cell'); bad = true; }
        const hit = cachedIdentifier(v);
        if (hit) { refusal = { column: headers[i], category: hit.category, reason: `${hit.reason} (line ${line})` }; break; }
      }
      if (refusal) break outer;
      if (bad) { rejectedRows++; continue; }

      let predJson = '{';
      const values: (number | string)[] = [];
      for (let k = 0; k < preds.length; k++) {
        const p = preds[k];
        const raw = record[p.idx].trim();
        if (raw === '') { reject(line, p.fileCol, raw, `missing value for ${p.name}`, `missing ${p.name}`); bad = true; continue; }
        if (p.kind === 'numeric') {
          let x = Number(raw);
          if (p.age && raw === '90+') x = 90; // the Safe Harbor grouping of ages over 89 enters the formula as 90
          else if (p.age && ageOver89(raw)) { refusal = { column: p.fileCol, category: 'ages over 89', reason: `holds an age over 89 (line ${line}); group them as "90+"` }; break; }
          if (!Number.isFinite(x) || raw === '') { reject(line, p.fileCol, raw, `${p.name} must be a number`, `non-numeric ${p.name}`); bad = true; continue; }
          if (x < p.min || x > p.max) { reject(line, p.fileCol, raw, `${p.name} must be between ${p.min} and ${p.max}`, `${p.name} out of range`); bad = true; continue; }
          if (p.positiveOnly && x <= 0) { reject(line, p.fileCol, raw, `${p.name} enters the score as a logarithm and must be above 0`, `${p.name} not above 0`); bad = true; continue; }
          values.push(x);
          if (!bad) predJson += `${k ? ',' : ''}${p.key}:${x}`;
        } else {
          values.push(raw);
          if (!bad) predJson += `${k ? ',' : ''}${p.key}:${JSON.stringify(raw)}`;
        }
      }
      if (refusal) break outer;
      const yRaw = record[outcomeIdx].trim();
      const yl = yRaw.toLowerCase();
      const y = pos.has(yl) ? 1 : neg.has(yl) ? 0 : -1;
      if (y < 0) {
        reject(line, mapping.outcome.column, yRaw, yRaw === '' ? 'missing outcome' : `the outcome must be one of ${[...pos, ...neg].join(', ')}`, yRaw === '' ? 'missing outcome' : 'outcome not a known label');
        bad = true;
      }
      let date: string | null = null;
      if (dateIdx >= 0) {
        const d = record[dateIdx].trim();
        if (d !== '') {
          date = periodCache.get(d) ?? null;
          if (date === null && !periodCache.has(d)) { date = periodStart(d); if (periodCache.size < 10_000) periodCache.set(d, date); }
          if (!date) { reject(line, mapping.date!.column, d, 'the period must be YYYY-MM, YYYY-Qn or YYYY', 'unreadable period'); bad = true; }
        }
      }
      if (bad) { rejectedRows++; continue; }

      let subJson = '{';
      for (let k = 0; k < subs.length; k++) {
        const v = record[subs[k].idx].trim();
        subAcc[k].add(v === '' ? null : v);
        if (v !== '') {
          const cache = subJsonCache[k];
          let enc = cache.get(v);
          if (enc === undefined) { enc = copyText(`${subs[k].key}:${JSON.stringify(v)}`); if (cache.size < 10_000) cache.set(v, enc); }
          subJson += subJson.length > 1 ? `,${enc}` : enc;
        }
      }
      for (let k = 0; k < preds.length; k++) predAcc[k].add(values[k]);
      outcomeAcc.add(String(y));
      dateAcc?.add(date);
      if (date) { if (!minDate || date < minDate) minDate = date; if (!maxDate || date > maxDate) maxDate = date; }
      accepted++;
      events += y;
      buffer += `${plannedId}\t${line}\t${y}\t${date ?? '\\N'}\t${copyText(predJson)}}\t${subJson}}\n`;
      if (buffer.length > 256 * 1024) {
        if (!out.write(buffer)) await new Promise<void>((res) => out.once('drain', () => res()));
        buffer = '';
      }
      if (batch.length >= 2000) await flushRejections();
      if (rowsRead % 20000 === 0 && Date.now() - lastWrite > 400) {
        lastWrite = Date.now();
        await dataSource.query('UPDATE cohort_uploads SET progress = $2, rows_read = $3, rows_rejected = $4, updated_at = now() WHERE id = $1', [id, Math.min(0.99, bytesRead / total), rowsRead, rejectedRows]);
      }
    }
    await batches.return(undefined);
    if (buffer) out.write(buffer);
    await new Promise<void>((res, rej) => out.end((err?: Error | null) => (err ? rej(err) : res())));

    if (refusal) {
      await removeQuietly(preparedPath);
      await removeQuietly(r.temp_path);
      await dataSource.transaction(async (m) => {
        await m.query('DELETE FROM cohort_upload_rejections WHERE upload_id = $1', [id]);
        await m.query(`UPDATE cohort_uploads SET status = 'refused', temp_path = NULL, prepared_path = NULL, warnings = $2, error = $3, updated_at = now() WHERE id = $1`,
          [id, JSON.stringify([refusal]), `refused by the de-identification screen: column "${refusal!.column}" ${refusal!.reason}; nothing was stored`]);
        await appendAudit({ action: 'cohort.upload.refused', actorId: r.created_by, targetType: 'cohort_upload', targetId: id, details: { columns: [{ column: refusal!.column, category: refusal!.category }] } }, m);
      });
      return;
    }
    await flushRejections();
    const columnSummary = Object.fromEntries([...summaries.entries()].map(([k, a]) => [k, a.summary()]));
    await dataSource.query(
      `UPDATE cohort_uploads SET status = 'checked', progress = 1, rows_read = $2, rows_accepted = $3, rows_rejected = $4, events = $5,
         rejection_counts = $6, column_summary = $7, event_period = $8, planned_version_id = $9, prepared_path = $10, updated_at = now() WHERE id = $1`,
      [id, rowsRead, accepted, rejectedRows, events, JSON.stringify([...reasonCounts.entries()].map(([reason, count]) => ({ reason, count }))),
        JSON.stringify(columnSummary), minDate ? JSON.stringify({ min: minDate, max: maxDate }) : null, plannedId, preparedPath],
    );
  } catch (err) {
    out.destroy();
    await removeQuietly(preparedPath);
    await dataSource.query(`UPDATE cohort_uploads SET status = 'failed', error = $2, updated_at = now() WHERE id = $1`, [id, `the file could not be processed: ${(err as Error).message.split('\n')[0]}`]).catch(() => undefined);
  }
}

// ---- Rejections ----------------------------------------------------------------------------------------------

export async function listRejections(id: string, page: number, pageSize: number) {
  const rows = await dataSource.query(
    `SELECT line_no AS line, column_name AS column, value, reason FROM cohort_upload_rejections WHERE upload_id = $1 ORDER BY line_no, column_name LIMIT $2 OFFSET $3`,
    [id, pageSize, (page - 1) * pageSize],
  );
  const [{ n }] = await dataSource.query('SELECT count(*)::int AS n FROM cohort_upload_rejections WHERE upload_id = $1', [id]);
  return { rejections: rows as { line: number; column: string; value: string; reason: string }[], total: n as number, page, pageSize };
}

const csvCell = (s: string) => (/[",\n\r;]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s);

/** The rejected cells as CSV, formula-looking cells prefixed with an apostrophe so a spreadsheet shows them as text. */
export async function* rejectionsCsv(id: string): AsyncGenerator<string> {
  yield 'line,column,value,reason\n';
  let after = -1;
  for (;;) {
    const rows: { line: number; column: string; value: string; reason: string }[] = await dataSource.query(
      `SELECT line_no AS line, column_name AS column, value, reason FROM cohort_upload_rejections WHERE upload_id = $1 AND line_no > $2 ORDER BY line_no LIMIT 5000`,
      [id, after],
    );
    if (!rows.length) return;
    // Lines can hold several rejected cells: read whole lines per page so none is split.
    const lastLine = rows[rows.length - 1].line;
    const page = rows.length === 5000 ? rows.filter((x) => x.line < lastLine) : rows;
    if (!page.length) {
      const all = await dataSource.query(`SELECT line_no AS line, column_name AS column, value, reason FROM cohort_upload_rejections WHERE upload_id = $1 AND line_no = $2`, [id, lastLine]);
      page.push(...all);
    }
    yield page.map((x) => [String(x.line), x.column, x.value, x.reason].map((c) => csvCell(neutraliseCell(c))).join(',')).join('\n') + '\n';
    after = page[page.length - 1].line;
  }
}

// ---- Step 3: store or discard ---------------------------------------------------------------------------------

export async function commitUpload(actor: AuthUser, id: string, excludeRejected: boolean, ip: string) {
  const r = await uploadRow(id);
  if (r.status !== 'checked' || !r.prepared_path || !r.planned_version_id) throw conflict(`this upload is ${r.status}; only a checked upload can be stored`);
  if (r.rows_rejected > 0 && !excludeRejected) {
    throw conflict(`${r.rows_rejected} row(s) were rejected: store with excludeRejected: true (the exclusions are recorded), or fix the file and upload it again`);
  }
  if (r.rows_accepted === 0) throw new HttpError(422, 'no row passed the checks; nothing to store');
  const sv = await loadScoreVersion(r.score_version_id);
  const qr = dataSource.createQueryRunner();
  await qr.connect();
  await qr.startTransaction();
  let versionId: string;
  let cohortId: string;
  let version: number;
  try {
    if (r.cohort_id) {
      cohortId = r.cohort_id;
      await qr.query('SELECT id FROM cohorts WHERE id = $1 FOR UPDATE', [cohortId]);
    } else {
      const existing = await qr.query('SELECT id FROM cohorts WHERE lower(name) = lower($1)', [r.cohort_name]);
      if (existing.length) throw conflict(`a cohort named "${r.cohort_name}" was created meanwhile; upload again as a new version of it`);
      const [c] = await qr.query('INSERT INTO cohorts (name, score_id, created_by) VALUES ($1, $2, $3) RETURNING id', [r.cohort_name, sv.scoreId, actor.id]);
      cohortId = c.id;
    }
    const [{ next }] = await qr.query('SELECT coalesce(max(version), 0) + 1 AS next FROM cohort_versions WHERE cohort_id = $1', [cohortId]);
    version = next;
    const period = r.event_period;
    const endOfMonth = (d: string) => {
      const [y, m] = d.split('-').map(Number);
      return new Date(Date.UTC(y, m, 0)).toISOString().slice(0, 10);
    };
    const exclusions = r.rejection_counts;
    const mapping = { ...r.mapping, scoreVersionId: r.score_version_id, delimiter: r.delimiter };
    const [v] = await qr.query(
      `INSERT INTO cohort_versions (id, cohort_id, version, label, period_start, period_end, source_filename, source_sha256, source_bytes,
         row_count, events, excluded_count, exclusions, mapping, column_summary, uploaded_by)
       VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16) RETURNING id`,
      [r.planned_version_id, cohortId, version, r.label || `version ${version}`, r.period_start ?? period?.min ?? null, r.period_end ?? (period ? endOfMonth(period.max) : null),
        r.source_filename, r.sha256, r.bytes, r.rows_accepted, r.events, r.rows_rejected, JSON.stringify(exclusions), JSON.stringify(mapping), JSON.stringify(r.column_summary), actor.id],
    );
    versionId = v.id;
    const client = (qr as unknown as { databaseConnection: PoolClient }).databaseConnection;
    const copy = client.query(copyFrom('COPY cohort_rows (cohort_version_id, line_no, outcome, event_date, predictors, subgroups) FROM STDIN'));
    await pipeline(createReadStream(r.prepared_path, { highWaterMark: 1024 * 1024 }), copy);
    if (copy.rowCount !== r.rows_accepted) throw new Error(`COPY stored ${copy.rowCount} rows, expected ${r.rows_accepted}`);
    await qr.query(`UPDATE cohort_uploads SET status = 'committed', cohort_id = $2, cohort_version_id = $3, temp_path = NULL, prepared_path = NULL, updated_at = now() WHERE id = $1`, [id, cohortId, versionId]);
    await qr.query('DELETE FROM cohort_upload_rejections WHERE upload_id = $1', [id]);
    await appendAudit({
      actorId: actor.id, actorEmail: actor.email, action: 'cohort.version.stored', targetType: 'cohort_version', targetId: versionId, sourceIp: ip,
      details: { cohortId, version, rows: r.rows_accepted, events: r.events, excluded: r.rows_rejected, sha256: r.sha256, uploadId: id },
    }, qr.manager);
    await qr.commitTransaction();
  } catch (err) {
    await qr.rollbackTransaction().catch(() => undefined);
    if (err instanceof HttpError) throw err;
    console.error(`[uploads] storing upload ${id} failed, rolled back:`, (err as Error).message);
    throw new HttpError(500, 'storing the cohort failed and was rolled back: nothing was stored; try again or upload the file again');
  } finally {
    await qr.release();
  }
  await removeQuietly(r.prepared_path);
  await removeQuietly(r.temp_path);
  return { cohortId, cohortVersionId: versionId, version, rowCount: r.rows_accepted, events: r.events, excludedCount: r.rows_rejected, sha256: r.sha256 };
}

export async function discardUpload(actor: AuthUser, id: string, ip: string) {
  const r = await uploadRow(id);
  if (r.status === 'committed') throw conflict('this upload is stored as a cohort version; stored versions are immutable');
  if (r.status === 'processing') await whenProcessed(id);
  const again = await uploadRow(id);
  await removeQuietly(again.temp_path);
  await removeQuietly(again.prepared_path);
  await dataSource.transaction(async (m) => {
    await m.query('DELETE FROM cohort_upload_rejections WHERE upload_id = $1', [id]);
    await m.query(`UPDATE cohort_uploads SET status = 'discarded', temp_path = NULL, prepared_path = NULL, updated_at = now() WHERE id = $1`, [id]);
    await appendAudit({ actorId: actor.id, actorEmail: actor.email, action: 'cohort.upload.discarded', targetType: 'cohort_upload', targetId: id, sourceIp: ip }, m);
  });
  return getUpload(id);
}

export async function listMyUploads(actor: AuthUser) {
  const rows: { id: string }[] = await dataSource.query(
    `SELECT id FROM cohort_uploads WHERE ($1::uuid IS NULL OR created_by = $1) AND status IN ('pending', 'processing', 'checked', 'failed') ORDER BY created_at DESC LIMIT 50`,
    [actor.role === 'admin' ? null : actor.id],
  );
  return Promise.all(rows.map((r) => getUpload(r.id)));
}

/** Score versions a cohort can be uploaded against (for the upload form's select). */
export async function scoreVersionChoices() {
  const rows: { id: string; scoreName: string; version: number; mode: string; probability_column: string | null; model: ScoreModel | null }[] = await dataSource.query(
    `SELECT sv.id, s.name AS "scoreName", sv.version, sv.mode, sv.probability_column, sv.model FROM score_versions sv JOIN scores s ON s.id = sv.score_id ORDER BY s.name, sv.version DESC`,
  );
  return rows.map((r) => ({ id: r.id, scoreName: r.scoreName, version: r.version, mode: r.mode, requiredPredictors: requiredPredictors({ mode: r.mode as 'formula', model: r.model, probabilityColumn: r.probability_column }) }));
}
