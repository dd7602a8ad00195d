// Upkeep of uploads nobody finished: the hourly 'upload-sweep' job discards those unchanged past the keep period, and
// each process that receives files removes temp files no upload refers to.
import { readdir, stat } from 'node:fs/promises';
import path from 'node:path';
import { config } from '../../platform/config';
import { dataSource } from '../../platform/database/dataSource';
import { IsNull, Not } from 'typeorm';
import { appendAudit } from '../accounts/audit';
import { type JobHandler } from '../../jobs/queue';
import { warmUploadThreads } from '../../jobs/threads/pool';
import { logger } from '../../platform/observability/log';
import {
  deleteStagedRows,
  FORGET_DERIVED,
  removeQuietly,
  running,
  uploadDir,
  uploads,
  setUploadsStopping,
} from './uploads';

/** The 'upload-sweep' job (a pg-boss schedule): uploads nobody finished are discarded after the keep period. */
export const uploadSweepJob: JobHandler = async () => {
  const n = await discardStaleUploads();
  if (n) logger.info({ discarded: n }, 'discarded stale uploads');
};

/**
 * Uploads nobody finished (not stored, not discarded) are discarded after PLUMBLINE_UPLOAD_KEEP_DAYS without a change
 * (default 14): their temp file and staged rows go, and the audit trail says so. Returns how many were discarded.
 */
export async function discardStaleUploads(keepDays = config.uploadKeepDays): Promise<number> {
  const stale = await uploads()
    .createQueryBuilder('u')
    .select(['u.id', 'u.tempPath', 'u.plannedVersionId', 'u.createdBy'])
    .where(`u.status IN ('pending', 'checked', 'failed') AND u.updated_at < now() - make_interval(days => :keepDays)`, {
      keepDays,
    })
    .getMany();
  for (const u of stale) {
    if (running.has(u.id)) continue;
    await dataSource.transaction(async (m) => {
      const [, changed] = await m.query(
        `UPDATE cohort_uploads SET status = 'discarded', temp_path = NULL, ${FORGET_DERIVED}, updated_at = now() WHERE id = $1 AND status IN ('pending', 'checked', 'failed')`,
        [u.id],
      );
      if (changed !== 1) return;
      await deleteStagedRows(u.plannedVersionId, m);
      await m.query('DELETE FROM cohort_upload_rejections WHERE upload_id = $1', [u.id]);
      await appendAudit(
        {
          action: 'cohort.upload.expired',
          actorId: null,
          targetType: 'cohort_upload',
          targetId: u.id,
          details: { keepDays, uploadedBy: u.createdBy },
        },
        m,
      );
    });
    await removeQuietly(u.tempPath);
  }
  return stale.length;
}

// A received file is named <uuid>.csv; nothing else in the folder is ever removed.
const TEMP_NAME = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}\.csv$/;
// Unreferenced files younger than this may be another API process's upload still being received or screened.
const ORPHAN_AGE_MS = 10 * 60 * 1000;

/**
 * Removes temp files no upload refers to (left by a crash or a kill mid-upload): at start and every ten minutes.
 * Only our own file names, and only files untouched for ten minutes. Returns the names removed.
 */
export async function sweepUploadDir(now = Date.now()): Promise<string[]> {
  let names: string[];
  try {
    names = (await readdir(uploadDir)).filter((n) => TEMP_NAME.test(n));
  } catch {
    return [];
  }
  if (!names.length) return [];
  const rows = await uploads().find({ where: { tempPath: Not(IsNull()) }, select: { id: true, tempPath: true } });
  const referenced = new Set(rows.map((r) => path.resolve(r.tempPath!)));
  const removed: string[] = [];
  for (const name of names) {
    const file = path.resolve(uploadDir, name);
    if (referenced.has(file)) continue;
    const info = await stat(file).catch(() => null);
    if (!info || now - info.mtimeMs < ORPHAN_AGE_MS) continue;
    await removeQuietly(file);
    removed.push(name);
  }
  if (removed.length) logger.info({ removed: removed.length }, 'removed temp files no upload refers to');
  return removed;
}

/** In every process that receives uploads: a checking thread started ahead, and the temp-folder sweep at start and
 * every ten minutes (local files). */
export async function startUploadUpkeep(): Promise<() => void> {
  setUploadsStopping(false);
  warmUploadThreads();
  const sweepFiles = () =>
    void sweepUploadDir().catch((err: Error) => logger.error({ err }, 'sweeping the upload folder failed'));
  sweepFiles();
  const fileTimer = setInterval(sweepFiles, ORPHAN_AGE_MS);
  fileTimer.unref();
  return () => {
    setUploadsStopping(true);
    clearInterval(fileTimer);
  };
}
