// Cohort uploads: the multipart transfer (with progress), mapping, checks, rejected rows, store or discard.
import type { ColumnMappingSpec, ScreenFinding, UploadView } from '@shared/cohorts';
import { ApiError, downloadFile, http } from './http';

export interface ScoreVersionChoice {
  id: string;
  scoreId: string;
  scoreName: string;
  version: number;
  mode: string;
  requiredPredictors: { column: string; kind: string; positiveOnly: boolean }[];
}

export interface UploadStart {
  file: File;
  scoreVersionId: string;
  cohortId?: string;
  cohortName?: string;
  label?: string;
  periodStart?: string;
  periodEnd?: string;
}

export interface SavedMapping {
  id: string;
  name: string;
  cohortId: string | null;
  mapping: ColumnMappingSpec;
  createdAt: string;
}

/** A refused file: the server names each offending column and why. */
export const refusedColumns = (err: unknown): ScreenFinding[] =>
  err instanceof ApiError && err.status === 422
    ? ((err.details as { columns?: ScreenFinding[] } | undefined)?.columns ?? [])
    : [];

/**
 * XMLHttpRequest rather than fetch: only XHR reports upload progress. The token comes from the caller
 * (the auth store), as http.ts does for every other call.
 */
export function uploadCohortFile(
  start: UploadStart,
  token: string,
  onProgress: (fraction: number) => void,
): Promise<{ upload: UploadView; preview: string[][] }> {
  return new Promise((resolve, reject) => {
    const form = new FormData();
    for (const [k, v] of Object.entries(start)) if (k !== 'file' && v) form.append(k, String(v));
    form.append('file', start.file, start.file.name);
    const xhr = new XMLHttpRequest();
    xhr.open('POST', '/api/cohorts');
    xhr.setRequestHeader('Authorization', `Bearer ${token}`);
    xhr.upload.onprogress = (e) => e.lengthComputable && onProgress(e.loaded / e.total);
    xhr.onerror = () => reject(new ApiError(0, 'the server could not be reached; check your connection and try again'));
    xhr.onload = () => {
      let body: { error?: string; details?: unknown } & Record<string, unknown> = {};
      try {
        body = JSON.parse(xhr.responseText || '{}');
      } catch {
        /* not JSON */
      }
      if (xhr.status >= 200 && xhr.status < 300) resolve(body as never);
      else
        reject(
          new ApiError(
            xhr.status,
            typeof body.error === 'string' ? body.error : `upload failed (HTTP ${xhr.status})`,
            body.details,
          ),
        );
    };
    xhr.send(form);
  });
}

export const scoreVersionChoices = async () =>
  (await http.get<{ scoreVersions: ScoreVersionChoice[] }>('/api/upload-score-versions')).scoreVersions;
export const getUpload = async (id: string) =>
  (await http.get<{ upload: UploadView }>(`/api/uploads/${encodeURIComponent(id)}`)).upload;
export const postMapping = async (id: string, mapping: ColumnMappingSpec, saveAs?: string) =>
  (
    await http.post<{ upload: UploadView }>(`/api/uploads/${encodeURIComponent(id)}/mapping`, {
      mapping,
      ...(saveAs ? { saveAs } : {}),
    })
  ).upload;
export const listRejections = (id: string, page: number, pageSize: number) =>
  http.get<{ rejections: { line: number; column: string; value: string; reason: string }[]; total: number }>(
    `/api/uploads/${encodeURIComponent(id)}/rejections`,
    { page, pageSize },
  );
/** Store: every rejected row excluded (`true`), or the rejected rows chosen by line number. */
export const commitUpload = (id: string, exclude: true | number[]) =>
  http.post<{
    cohortId: string;
    cohortVersionId: string;
    version: number;
    rowCount: number;
    events: number;
    excludedCount: number;
    sha256: string;
  }>(
    `/api/uploads/${encodeURIComponent(id)}/commit`,
    exclude === true ? { excludeRejected: true } : { excludeLines: exclude },
  );
export const listUploads = async () => (await http.get<{ uploads: UploadView[] }>('/api/uploads')).uploads;
/** A same-name upload refused with 409: the cohort it names, so the page can offer to add a version of it. */
export const existingCohort = (err: unknown): { id: string; name: string } | null =>
  err instanceof ApiError && err.status === 409
    ? ((err.details as { existingCohort?: { id: string; name: string } } | undefined)?.existingCohort ?? null)
    : null;
/** The CSV header a cohort file needs for a score version. */
export const downloadTemplate = (scoreId: string, version: number, scoreName: string) =>
  downloadFile(
    `/api/scores/${encodeURIComponent(scoreId)}/versions/${version}/template.csv`,
    `${scoreName.toLowerCase().replace(/[^a-z0-9]+/g, '-')}-v${version}-cohort-template.csv`,
  );
export const discardUpload = async (id: string) =>
  (await http.post<{ upload: UploadView }>(`/api/uploads/${encodeURIComponent(id)}/discard`)).upload;
export const listMappings = async (cohortId?: string) =>
  (await http.get<{ mappings: SavedMapping[] }>('/api/mappings', { cohortId })).mappings;

/** The rejected rows with their mapped values, to fix and upload again. */
export const downloadRejections = (id: string) =>
  downloadFile(`/api/uploads/${encodeURIComponent(id)}/rejections.csv`, `rejected-rows-${id.slice(0, 8)}.csv`);
