// Cohort uploads, their lifecycle: screen a received file → map its columns and check every row (a job) → store the
// checked rows as a cohort version (one transaction) or discard. What a score needs and the mapping guess are in
// uploadMapping.ts, the rejected rows in uploadRejections.ts, the clean-up of stale uploads and files in uploadSweep.ts.
import { codingIssues, predictorViews } from './codingCheck';
import { randomUUID } from 'node:crypto';
import { unlink } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import path from 'node:path';
import type { ColumnMappingSpec, UploadFields, UploadStatus, UploadView } from '@shared/cohorts';
import { config } from '../../platform/config';
import { dataSource } from '../../platform/database/dataSource';
import { In } from 'typeorm';
import { Cohort } from '../../platform/database/entities/Cohort';
import { CohortUpload } from '../../platform/database/entities/CohortUpload';
import { CohortVersion } from '../../platform/database/entities/CohortVersion';
import { ColumnMapping } from '../../platform/database/entities/ColumnMapping';
import { ScoreVersion } from '../../platform/database/entities/ScoreVersion';
import { conflict, DomainError, invalid, notFound, refused } from '../errors';
import type { AuthUser } from '../accounts/actor';
import type { UploadWorkerData } from '../../jobs/threads/uploadWorker';
import { appendAudit } from '../accounts/audit';
import { maskPreview } from './deidentify';
import { drainJobs, enqueue, JOB, jobWorkersRunning, type JobHandler } from '../../jobs/queue';
import { checkInThread, screenInThread } from '../../jobs/threads/pool';
import { rejectedLineNumbers } from './rejectedRows';
import type { RequiredPredictor } from './uploadCheck';
import { logger } from '../../platform/observability/log';
import { timeJob } from '../../platform/observability/metrics';
import { requiredPredictors, suggestMapping } from './uploadMapping';

export { periodStart } from './uploadCheck';

/** Where received files wait between screening and storing (PLUMBLINE_UPLOAD_DIR). */
export const uploadDir = config.uploadDir ?? path.join(tmpdir(), 'plumbline-uploads');
export type { RequiredPredictor };

export interface ReceivedFile {
  path: string;
  originalName: string;
  sha256: string;
  bytes: number;
}

async function loadScoreVersion(id: string): Promise<ScoreVersion> {
  const sv = await dataSource.getRepository(ScoreVersion).findOne({ where: { id } });
  if (!sv) throw notFound('score version');
  return sv;
}

export async function removeQuietly(path: string | null | undefined) {
  if (path) await unlink(path).catch(() => undefined);
}

/** Step 1: screen the received file; refuse (422, file deleted) or keep it as a pending upload. */
export async function createUpload(actor: AuthUser, file: ReceivedFile, fields: UploadFields, ip: string) {
  try {
    const sv = await loadScoreVersion(fields.scoreVersionId);
    if (fields.cohortId) {
      const found = await dataSource
        .getRepository(Cohort)
        .find({ select: { id: true }, where: { id: fields.cohortId } });
      if (!found.length) throw notFound('cohort');
    } else {
      const found = await dataSource
        .getRepository(Cohort)
        .createQueryBuilder('c')
        .select(['c.id', 'c.name'])
        .where('lower(c.name) = lower(:name)', { name: fields.cohortName })
        .getMany();
      // Said in words; the details let the client offer "add as a new version of" that cohort.
      if (found.length)
        throw conflict(
          `a cohort named "${found[0].name}" already exists: add this file as a new version of "${found[0].name}", or choose another name for a new cohort`,
          { existingCohort: { id: found[0].id, name: found[0].name } },
        );
    }
    // Parsing the sample and running the screen's patterns is CPU work: done in an upload thread, off the API's loop.
    const looked = await screenInThread(file.path);
    if (looked.type === 'refused-file') throw new DomainError(looked.kind, looked.message, looked.details);
    if (looked.type === 'error') throw new Error(looked.message);
    const { delimiter, headers, sample, screen } = looked;
    if (screen.refused.length) {
      await appendAudit({
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'cohort.upload.refused',
        targetType: 'cohort_upload',
        sourceIp: ip,
        details: {
          filename: file.originalName,
          sha256: file.sha256,
          columns: screen.refused.map((f) => ({ column: f.column, category: f.category })),
        },
      });
      throw refused(
        `the file was refused by the de-identification screen: ${screen.refused.length} column(s) look like direct identifiers; nothing was stored`,
        {
          columns: screen.refused,
        },
      );
    }
    const required = requiredPredictors(sv);
    const suggested = suggestMapping(headers, sample, required);
    const {
      identifiers: [row],
    } = await dataSource.getRepository(CohortUpload).insert({
      status: 'pending',
      cohortId: fields.cohortId ?? null,
      cohortName: fields.cohortId ? null : fields.cohortName,
      scoreVersionId: sv.id,
      label: fields.label ?? '',
      periodStart: fields.periodStart ?? null,
      periodEnd: fields.periodEnd ?? null,
      sourceFilename: file.originalName.slice(0, 255),
      tempPath: file.path,
      sha256: file.sha256,
      bytes: String(file.bytes),
      delimiter,
      headers,
      warnings: screen.warnings,
      suggestedMapping: suggested,
      createdBy: actor.id,
    });
    await appendAudit({
      actorId: actor.id,
      actorEmail: actor.email,
      action: 'cohort.upload.received',
      targetType: 'cohort_upload',
      targetId: row.id,
      sourceIp: ip,
      details: { filename: file.originalName, sha256: file.sha256, bytes: file.bytes, columns: headers.length },
    });
    return { upload: await getUpload(row.id), preview: maskPreview(headers, sample.slice(0, 5)) };
  } catch (err) {
    await removeQuietly(file.path);
    throw err;
  }
}

export const uploads = () => dataSource.getRepository(CohortUpload);

export async function uploadRow(id: string): Promise<CohortUpload> {
  const row = await uploads().findOneBy({ id });
  if (!row) throw notFound('upload');
  return row;
}

const pause = (ms: number) => new Promise<void>((r) => setTimeout(r, ms));

/** An upload; with `waitSeconds`, an upload being checked is answered when its check ends (or after that long). */
export async function getUpload(id: string, waitSeconds = 0): Promise<UploadView> {
  // The check may run in another process: its row is what every process shares.
  const deadline = Date.now() + waitSeconds * 1000;
  let r = await uploadRow(id);
  while (r.status === 'processing' && Date.now() < deadline) {
    await pause(Math.min(250, Math.max(1, deadline - Date.now())));
    r = await uploadRow(id);
  }
  const sv = await dataSource.getRepository(ScoreVersion).findOne({ where: { id: r.scoreVersionId } });
  const views = sv ? predictorViews(sv, r.mapping ?? r.suggestedMapping) : [];
  return {
    id: r.id,
    status: r.status,
    cohortId: r.cohortId,
    cohortName: r.cohortName,
    scoreVersionId: r.scoreVersionId,
    label: r.label,
    periodStart: r.periodStart,
    periodEnd: r.periodEnd,
    sourceFilename: r.sourceFilename,
    sha256: r.sha256,
    bytes: Number(r.bytes),
    delimiter: r.delimiter,
    headers: r.headers,
    warnings: r.warnings,
    suggestedMapping: r.suggestedMapping,
    mapping: r.mapping,
    progress: r.progress,
    rowsRead: r.rowsRead,
    rowsAccepted: r.rowsAccepted,
    rowsRejected: r.rowsRejected,
    events: r.events,
    rejectionCounts: r.rejectionCounts,
    columnSummary: r.columnSummary,
    missingness: r.missingness,
    cohortVersionId: r.cohortVersionId,
    error: r.error,
    createdAt: new Date(r.createdAt).toISOString(),
    requiredPredictors: views,
    codingIssues: r.status === 'checked' ? codingIssues(views, r.mapping, r.columnSummary) : [],
  };
}

/** Uploads are private to their uploader (the admin's role reaches no upload route: COHORT_WRITERS in http/routes/table.ts); others get 404, not a hint. */
export async function assertOwner(actor: AuthUser, id: string): Promise<void> {
  const r = await uploadRow(id);
  if (r.createdBy !== actor.id) throw notFound('upload');
}

// ---- Step 2: mapping and the full pass over the file ----------------------------------------------------------

/** Checks under way in this process (a discard waits for its own; the sweep leaves them alone). */
export const running = new Map<string, Promise<void>>();

/**
 * For tests and the seed: resolves when the upload is no longer being checked. A process without job workers checks
 * the waiting uploads itself (drainJobs); one with workers waits for them.
 */
export async function whenProcessed(id: string): Promise<void> {
  for (;;) {
    const local = running.get(id);
    if (local) await local.catch(() => undefined);
    const row = await uploads().findOne({ where: { id }, select: { id: true, status: true } });
    if (!row || row.status !== 'processing') return;
    if (jobWorkersRunning()) await pause(100);
    else if ((await drainJobs(JOB.uploadCheck, uploadCheckJob)) === 0) await pause(100);
  }
}

export async function applyMapping(
  actor: AuthUser,
  id: string,
  mapping: ColumnMappingSpec,
  ip: string,
  saveAs?: string,
): Promise<UploadView> {
  const r = await uploadRow(id);
  if (!['pending', 'checked', 'failed'].includes(r.status) || !r.tempPath)
    throw conflict(`this upload is ${r.status}; mapping is possible only before it is stored`);
  const sv = await loadScoreVersion(r.scoreVersionId);
  const problems: string[] = [];
  const has = (c: string) => r.headers.includes(c);
  for (const p of requiredPredictors(sv)) {
    const col = mapping.predictors[p.column];
    if (!col) problems.push(`predictor "${p.column}" is not mapped to a file column`);
    else if (!has(col)) problems.push(`predictor "${p.column}": the file has no column "${col}"`);
  }
  for (const k of Object.keys(mapping.predictors))
    if (!requiredPredictors(sv).some((p) => p.column === k))
      problems.push(`"${k}" is not a predictor of this score version`);
  // A supplied probability is the score itself, not a predictor to impute: its gaps stay rejected rows.
  if (sv.mode === 'supplied' && mapping.predictorsWithGaps?.length)
    problems.push(`the supplied probability column "${sv.probabilityColumn}" cannot have gaps`);
  // Label readings only for indicator columns, and only into the formula's levels (or '' for "none of them").
  for (const [k, readings] of Object.entries(mapping.labels ?? {})) {
    const levels = predictorViews(sv, mapping).find((p) => p.column === k)?.levels ?? [];
    if (!levels.length) {
      problems.push(`"${k}" is not an indicator predictor of this score version, so its labels cannot be mapped`);
      continue;
    }
    for (const [label, level] of Object.entries(readings))
      if (level !== '' && !levels.includes(level))
        problems.push(
          `${k}: "${label}" can only be read as ${levels.map((l) => `"${l}"`).join(', ')} or as none of them`,
        );
  }
  if (!has(mapping.outcome.column)) problems.push(`outcome: the file has no column "${mapping.outcome.column}"`);
  const pos = mapping.outcome.positive.map((s) => s.toLowerCase());
  if (mapping.outcome.negative.some((n) => pos.includes(n.toLowerCase())))
    problems.push('outcome: a label cannot be both positive and negative');
  if (mapping.date && !has(mapping.date.column)) problems.push(`date: the file has no column "${mapping.date.column}"`);
  for (const [name, col] of Object.entries(mapping.subgroups))
    if (!has(col)) problems.push(`subgroup "${name}": the file has no column "${col}"`);
  if (problems.length) throw invalid(`the mapping does not fit this file: ${problems.join('; ')}`, { problems });

  const plannedVersionId = randomUUID();
  await dataSource.transaction(async (m) => {
    const [, changed] = await m.query(
      `UPDATE cohort_uploads SET status = 'processing', mapping = $2, planned_version_id = $3, progress = 0, rows_read = 0, rows_accepted = 0, rows_rejected = 0, events = 0,
         rejection_counts = '[]', column_summary = '{}', event_period = NULL, missingness = NULL, error = NULL, updated_at = now()
       WHERE id = $1 AND status IN ('pending', 'checked', 'failed')`,
      [id, JSON.stringify(mapping), plannedVersionId],
    );
    if (changed !== 1)
      throw conflict('this upload changed meanwhile (checked again or stored from another window); reload it');
    // A second mapping replaces the first pass: its staged rows and rejections go.
    await deleteStagedRows(r.plannedVersionId, m);
    await m.query('DELETE FROM cohort_upload_rejections WHERE upload_id = $1', [id]);
    if (saveAs)
      await m.getRepository(ColumnMapping).save({ name: saveAs, cohortId: r.cohortId, mapping, createdBy: actor.id });
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'cohort.upload.mapped',
        targetType: 'cohort_upload',
        targetId: id,
        sourceIp: ip,
        details: { mapping, savedAs: saveAs ?? null },
      },
      m,
    );
    await enqueue(m, JOB.uploadCheck, { uploadId: id, plannedVersionId });
  });
  return getUpload(id);
}

/** The advisory-lock key of an upload check's lease (as a run's: dropped by PostgreSQL when its process dies). */
const UPLOAD_LEASE_SQL = `hashtextextended('plumbline upload ' || $1::text, 0)`;

/**
 * The 'upload-check' job. Its lease makes a retry wait while a live process still checks the file; a retry of a
 * check whose process died finds the upload still 'processing' (PostgreSQL rolled the dead check's transaction back,
 * so nothing of it is stored) and checks it again. A job of an older mapping, or of an upload already checked, does nothing.
 */
export const uploadCheckJob: JobHandler<{ uploadId: string; plannedVersionId: string }> = async (job) => {
  const { uploadId: id, plannedVersionId } = job.data;
  const lease = dataSource.createQueryRunner();
  await lease.connect();
  try {
    await lease.query(`SELECT pg_advisory_lock(${UPLOAD_LEASE_SQL})`, [id]);
    const r = await uploadRow(id);
    if (r.status !== 'processing' || r.plannedVersionId !== plannedVersionId || !r.mapping) return;
    if (job.retryCount > 0) {
      logger.warn({ uploadId: id, attempt: job.retryCount + 1 }, 'checking an upload again after its process stopped');
      await deleteStagedRows(plannedVersionId);
    }
    const sv = await loadScoreVersion(r.scoreVersionId);
    const pass = timeJob('upload_check', () => processUpload(id, sv, r.mapping!, plannedVersionId));
    running.set(id, pass);
    try {
      await pass;
    } finally {
      running.delete(id);
    }
  } finally {
    await lease.query('SELECT pg_advisory_unlock_all()').catch(() => undefined);
    await lease.release();
  }
};

/** The dead-letter job of a check cut off twice: the upload is marked failed; the steward maps it again. */
export const uploadCheckAbandonedJob: JobHandler<{ uploadId: string; plannedVersionId: string }> = async (job) => {
  const { uploadId: id, plannedVersionId } = job.data;
  await dataSource.transaction(async (m) => {
    const [, changed] = await m.query(
      `UPDATE cohort_uploads SET status = 'failed', error = 'the server stopped while this file was being checked; nothing was stored — apply the mapping again to check it', updated_at = now()
       WHERE id = $1 AND status = 'processing' AND planned_version_id = $2 AND pg_try_advisory_xact_lock(hashtextextended('plumbline upload ' || id::text, 0))`,
      [id, plannedVersionId],
    );
    if (changed === 1) await deleteStagedRows(plannedVersionId, m);
  });
  logger.warn({ uploadId: id }, 'an upload check was cut off twice; marked failed');
};

/** What a discarded or expired upload forgets besides its rows and rejections: everything summarised from the file's cells. */
export const FORGET_DERIVED = `column_summary = '{}', event_period = NULL, missingness = NULL, rejection_counts = '[]', suggested_mapping = NULL, progress = 0`;

/** Staged rows of an upload that never became a cohort version (re-mapped, discarded, failed). */
export async function deleteStagedRows(
  plannedVersionId: string | null,
  m: { query: (q: string, p: unknown[]) => Promise<unknown> } = dataSource,
) {
  if (!plannedVersionId) return;
  await m.query(
    'DELETE FROM cohort_row_blocks WHERE cohort_version_id = $1 AND NOT EXISTS (SELECT 1 FROM cohort_versions WHERE id = $1)',
    [plannedVersionId],
  );
}

/** The full pass runs in a worker thread (server/src/jobs/threads/uploadWorker.ts); this side records progress and endings. */
async function processUpload(
  id: string,
  sv: ScoreVersion,
  mapping: ColumnMappingSpec,
  plannedVersionId: string,
): Promise<void> {
  const r = await uploadRow(id);
  const data: UploadWorkerData = {
    uploadId: id,
    db: { ...config.db },
    path: r.tempPath!,
    delimiter: r.delimiter,
    headers: r.headers,
    mapping,
    predictors: requiredPredictors(sv),
    supplied: sv.mode === 'supplied',
    plannedVersionId,
    totalBytes: Number(r.bytes),
  };
  let lastWrite = 0;
  let progressWrite: Promise<unknown> = Promise.resolve();
  const ending = await checkInThread(data, (m) => {
    if (Date.now() - lastWrite < 400) return;
    lastWrite = Date.now();
    // Only while still processing: the worker's own final update wins over a late progress write.
    progressWrite = dataSource
      .query(
        `UPDATE cohort_uploads SET progress = $2, rows_read = $3, rows_rejected = $4, updated_at = now() WHERE id = $1 AND status = 'processing'`,
        [id, m.fraction, m.rowsRead, m.rowsRejected],
      )
      .catch(() => undefined);
  });
  await progressWrite;
  if (ending.type === 'checked') return;
  if (ending.type === 'refused') {
    const refusal = ending.refusal;
    await removeQuietly(r.tempPath);
    await dataSource.transaction(async (m) => {
      await m.query('DELETE FROM cohort_upload_rejections WHERE upload_id = $1', [id]);
      const error =
        refusal.column === '(file)'
          ? `the file was refused: ${refusal.reason}; nothing was stored`
          : `refused by the de-identification screen: column "${refusal.column}" ${refusal.reason}; nothing was stored`;
      await m.query(
        `UPDATE cohort_uploads SET status = 'refused', temp_path = NULL, warnings = $2, error = $3, column_summary = '{}', event_period = NULL, missingness = NULL, updated_at = now() WHERE id = $1`,
        [id, JSON.stringify([refusal]), error],
      );
      await appendAudit(
        {
          action: 'cohort.upload.refused',
          actorId: r.createdBy,
          targetType: 'cohort_upload',
          targetId: id,
          details: { columns: [{ column: refusal.column, category: refusal.category }] },
        },
        m,
      );
    });
    return;
  }
  const message = ending.type === 'error' ? ending.message : 'unknown ending';
  logger.error({ uploadId: id, reason: message }, 'checking an upload failed');
  // The database's own message (table and constraint names) stays in the server log.
  const shown =
    ending.type === 'error' && ending.database
      ? 'the database refused the rows or went away (details are in the server log); try again'
      : message;
  // The check may have failed because PostgreSQL went away: then this write fails too, and is tried again until the
  // database is back, so the upload never stays "processing" (a crash meanwhile is covered by the job's retry).
  await untilStored(`marking upload ${id} failed`, async () => {
    await deleteStagedRows(plannedVersionId);
    await dataSource.query(
      `UPDATE cohort_uploads SET status = 'failed', error = $2, updated_at = now() WHERE id = $1 AND status = 'processing'`,
      [id, `the file could not be processed: ${shown}; nothing was stored`],
    );
  });
}

/** Runs a write until it succeeds, waiting 1 s, 2 s, 4 s … (at most 30 s) between tries; stops when the server stops. */
async function untilStored(what: string, write: () => Promise<void>): Promise<void> {
  for (let attempt = 0; ; attempt++) {
    try {
      await write();
      if (attempt > 0) logger.info({ tries: attempt + 1 }, `${what}: done`);
      return;
    } catch (err) {
      if (stopping) return;
      if (attempt === 0) logger.warn({ err }, `${what} failed; trying again until the database answers`);
      await new Promise((r) => setTimeout(r, Math.min(30_000, 1000 * 2 ** attempt)).unref());
    }
  }
}
let stopping = false;
/** The upkeep (uploadSweep.ts) says when this process stops: writes that wait for the database then give up. */
export function setUploadsStopping(value: boolean): void {
  stopping = value;
}
// ---- Step 3: store or discard ---------------------------------------------------------------------------------

export async function commitUpload(
  actor: AuthUser,
  id: string,
  excludeRejected: boolean,
  ip: string,
  excludeLines?: number[],
) {
  const r = await uploadRow(id);
  if (r.status !== 'checked' || !r.plannedVersionId)
    throw conflict(`this upload is ${r.status}; only a checked upload can be stored`);
  let excludedLines: number[] | null = null;
  if (r.rowsRejected > 0 && excludeLines && !excludeRejected) {
    // Rows excluded one by one: every rejected row must be chosen; the rest are fixed in the file first.
    const rejected = await rejectedLineNumbers(id);
    const chosen = new Set(excludeLines);
    const unknown = excludeLines.filter((l) => !rejected.includes(l));
    if (unknown.length)
      throw invalid(`line(s) ${unknown.slice(0, 10).join(', ')} were not rejected; only rejected rows can be excluded`);
    const open = rejected.filter((l) => !chosen.has(l));
    if (open.length || rejected.length < r.rowsRejected) {
      throw conflict(
        `${open.length || r.rowsRejected - rejected.length} rejected row(s) are neither excluded nor fixed (line ${open.slice(0, 10).join(', ')}${open.length > 10 ? ', …' : ''}): exclude them too, or download the rejected rows, fix them in the file and upload it again`,
        { openLines: open.slice(0, 1000) },
      );
    }
    excludedLines = rejected;
  } else if (r.rowsRejected > 0 && !excludeRejected) {
    throw conflict(
      `${r.rowsRejected} row(s) were rejected: store with excludeRejected: true (the exclusions are recorded), or fix the file and upload it again`,
    );
  }
  if (r.rowsAccepted === 0) throw refused('no row passed the checks; nothing to store');
  const sv = await loadScoreVersion(r.scoreVersionId);
  // A coding mismatch (Y/N against the level "yes") stores nothing: the steward maps the labels or goes back.
  const mismatches = codingIssues(predictorViews(sv, r.mapping), r.mapping, r.columnSummary);
  if (mismatches.length)
    throw conflict(`the coding does not match the score: ${mismatches.map((m) => m.message).join(' ')}`, {
      codingIssues: mismatches,
    });
  const qr = dataSource.createQueryRunner();
  await qr.connect();
  await qr.startTransaction();
  let versionId: string;
  let cohortId: string;
  let version: number;
  try {
    // Two windows storing the same upload: the second waits here, then finds it stored.
    const locked = await qr.manager
      .getRepository(CohortUpload)
      .findOneOrFail({ where: { id }, select: { id: true, status: true }, lock: { mode: 'pessimistic_write' } });
    if (locked.status !== 'checked')
      throw conflict(`this upload is ${locked.status}; only a checked upload can be stored`);
    if (r.cohortId) {
      cohortId = r.cohortId;
      await qr.manager
        .getRepository(Cohort)
        .findOne({ select: { id: true }, where: { id: cohortId }, lock: { mode: 'pessimistic_write' } });
    } else {
      const existing = await qr.manager
        .getRepository(Cohort)
        .createQueryBuilder('c')
        .select('c.id')
        .where('lower(c.name) = lower(:name)', { name: r.cohortName })
        .getMany();
      if (existing.length)
        throw conflict(`a cohort named "${r.cohortName}" was created meanwhile; upload again as a new version of it`);
      const {
        identifiers: [c],
      } = await qr.manager
        .getRepository(Cohort)
        .insert({ name: r.cohortName as string, scoreId: sv.scoreId, createdBy: actor.id });
      cohortId = c.id;
    }
    const { next } = (await qr.manager
      .getRepository(CohortVersion)
      .createQueryBuilder('v')
      .select('coalesce(max(v.version), 0) + 1', 'next')
      .where('v.cohortId = :cohortId', { cohortId })
      .getRawOne<{ next: number }>())!;
    version = next;
    const period = r.eventPeriod;
    // The version ends on the last day of its latest period (2026-Q2 ends 2026-06-30); an upload checked before the
    // end was recorded falls back to the end of the latest start's month.
    const endOfMonth = (d: string) => {
      const [y, m] = d.split('-').map(Number);
      return new Date(Date.UTC(y, m, 0)).toISOString().slice(0, 10);
    };
    const exclusions = r.rejectionCounts;
    // periodKind: how the rows' periods were labelled, so they are shown as uploaded (2026-Q2, not 2026-04-01).
    const mapping = {
      ...r.mapping,
      scoreVersionId: r.scoreVersionId,
      delimiter: r.delimiter,
      periodKind: period?.kind ?? null,
      // and, when the file mixed kinds, each start date's uploaded label (2026-Q1 beside 2026-04)
      periodLabels: period?.labels ?? null,
    };
    const {
      identifiers: [v],
    } = await qr.manager.getRepository(CohortVersion).insert({
      id: r.plannedVersionId as string,
      cohortId,
      version,
      label: r.label || `version ${version}`,
      periodStart: r.periodStart ?? period?.min ?? null,
      periodEnd: r.periodEnd ?? (period ? (period.end ?? endOfMonth(period.max)) : null),
      sourceFilename: r.sourceFilename,
      sourceSha256: r.sha256,
      sourceBytes: r.bytes,
      rowCount: r.rowsAccepted,
      events: r.events,
      excludedCount: r.rowsRejected,
      exclusions,
      mapping: mapping as never, // jsonb: TypeORM's insert type cannot follow a nested null
      columnSummary: r.columnSummary,
      uploadedBy: actor.id,
      missingness: r.missingness ?? null,
    });
    versionId = v.id;
    // The rows were streamed in by the check, in the same transaction that recorded rows_accepted (the worker compares
    // COPY's count); only a new mapping or a discard removes them, and both change the status locked above. This
    // version row is what makes them a cohort version.
    await qr.query(
      `UPDATE cohort_uploads SET status = 'committed', cohort_id = $2, cohort_version_id = $3, temp_path = NULL, updated_at = now() WHERE id = $1 AND status = 'checked'`,
      [id, cohortId, versionId],
    );
    await qr.query('DELETE FROM cohort_upload_rejections WHERE upload_id = $1', [id]);
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'cohort.version.stored',
        targetType: 'cohort_version',
        targetId: versionId,
        sourceIp: ip,
        details: {
          cohortId,
          version,
          rows: r.rowsAccepted,
          events: r.events,
          excluded: r.rowsRejected,
          sha256: r.sha256,
          uploadId: id,
          ...(excludedLines ? { excludedLines: excludedLines.slice(0, 1000) } : {}),
        },
      },
      qr.manager,
    );
    await qr.commitTransaction();
  } catch (err) {
    await qr.rollbackTransaction().catch(() => undefined);
    if (err instanceof DomainError) throw err;
    logger.error({ err, uploadId: id }, 'storing an upload failed, rolled back');
    throw new DomainError(
      'failed',
      'storing the cohort failed and was rolled back: nothing was stored; try again or upload the file again',
    );
  } finally {
    await qr.release();
  }
  await removeQuietly(r.tempPath);
  return {
    cohortId,
    cohortVersionId: versionId,
    version,
    rowCount: r.rowsAccepted,
    events: r.events,
    excludedCount: r.rowsRejected,
    sha256: r.sha256,
  };
}

export async function discardUpload(actor: AuthUser, id: string, ip: string) {
  const r = await uploadRow(id);
  if (r.status === 'committed')
    throw conflict('this upload is stored as a cohort version; stored versions are immutable');
  // A check under way (in any process) is waited for a while; one still running then is refused below.
  if (r.status === 'processing') await getUpload(id, 30);
  // The upload's row is locked before anything is removed, as commitUpload locks it before storing: of a commit and a
  // discard sent at once, the second waits, then finds the other's status and is refused.
  const tempPath = await dataSource.transaction(async (m) => {
    const locked = await m.getRepository(CohortUpload).findOneOrFail({
      where: { id },
      select: { id: true, status: true, tempPath: true, plannedVersionId: true },
      lock: { mode: 'pessimistic_write' },
    });
    if (locked.status === 'discarded') return null;
    if (locked.status === 'committed')
      throw conflict('this upload was stored as a cohort version meanwhile; stored versions are immutable');
    if (locked.status === 'processing')
      throw conflict('this upload is being checked again; discard it when the check ends');
    await deleteStagedRows(locked.plannedVersionId, m);
    await m.query('DELETE FROM cohort_upload_rejections WHERE upload_id = $1', [id]);
    await m.query(
      `UPDATE cohort_uploads SET status = 'discarded', temp_path = NULL, ${FORGET_DERIVED}, updated_at = now() WHERE id = $1`,
      [id],
    );
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'cohort.upload.discarded',
        targetType: 'cohort_upload',
        targetId: id,
        sourceIp: ip,
      },
      m,
    );
    return locked.tempPath;
  });
  await removeQuietly(tempPath);
  return getUpload(id);
}

export async function listMyUploads(actor: AuthUser) {
  const rows = await uploads().find({
    where: { createdBy: actor.id, status: In(['pending', 'processing', 'checked', 'failed'] as UploadStatus[]) },
    select: { id: true },
    order: { createdAt: 'DESC' },
    take: 50,
  });
  return Promise.all(rows.map((r) => getUpload(r.id)));
}
