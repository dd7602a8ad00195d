// Thin handlers for cohorts, uploads and saved mappings; the rules live in domain/cohorts/uploads.ts and domain/cohorts/cohorts.ts.
import { createHash, randomUUID } from 'node:crypto';
import { createWriteStream, mkdirSync } from 'node:fs';
import { unlink } from 'node:fs/promises';
import path from 'node:path';
import type { NextFunction, Request, RequestHandler, Response } from 'express';
import multer, { type StorageEngine } from 'multer';
import { uploadFields } from '@shared/cohorts';
import { config } from '../../platform/config';
import { currentUser, sourceIp } from '../middleware/auth';
import { badRequest, HttpError, zodMessage } from '../middleware/errors';
import * as cohorts from '../../domain/cohorts/cohorts';
import * as uploads from '../../domain/cohorts/uploads';
import * as rejections from '../../domain/cohorts/uploadRejections';
import { scoreVersionChoices as uploadScoreVersions } from '../../domain/cohorts/uploadMapping';
import { uploadDir } from '../../domain/cohorts/uploads';

export { uploadDir } from '../../domain/cohorts/uploads';

interface HashedFile extends Express.Multer.File {
  sha256: string;
}

/** Streams the part to a temp file while hashing it, so the file never sits in memory. */
const hashingStorage: StorageEngine = {
  _handleFile(_req, file, cb) {
    mkdirSync(uploadDir, { recursive: true, mode: 0o700 });
    const target = path.join(uploadDir, `${randomUUID()}.csv`);
    const hash = createHash('sha256');
    const out = createWriteStream(target, { mode: 0o600, highWaterMark: 1024 * 1024 });
    let size = 0;
    file.stream.on('data', (chunk: Buffer) => {
      hash.update(chunk);
      size += chunk.length;
    });
    // A request cut off mid-body (client gone, connection reset, a body that ends before its closing boundary) ends
    // the part without its end: the unfinished, unscreened file is removed at once, never kept for a later sweep.
    let settled = false;
    const settle = (err: Error | null) => {
      if (settled) return;
      settled = true;
      if (!err) return cb(null, { path: target, size, sha256: hash.digest('hex') } as Partial<HashedFile>);
      out.destroy();
      unlink(target).then(
        () => cb(err),
        () => cb(err),
      );
    };
    file.stream.on('error', (err: Error) => settle(err));
    file.stream.on('close', () => {
      if (!file.stream.readableEnded) settle(new Error('the upload was cut off before the file ended'));
    });
    file.stream.pipe(out);
    out.on('error', (err) => settle(err));
    out.on('finish', () => settle(null));
  },
  _removeFile(_req, file, cb) {
    unlink(file.path).then(
      () => cb(null),
      () => cb(null),
    );
  },
};

const multerUpload = multer({
  storage: hashingStorage,
  limits: { fileSize: config.uploadLimitBytes, files: 1, fields: 20 },
}).single('file');

/** Multer with its errors turned into clear 4xx answers; the temp file is removed unless the upload keeps it. */
export const receiveFile: RequestHandler = (req: Request, res: Response, next: NextFunction) => {
  const ct = req.headers['content-type'] ?? '';
  if (!ct.startsWith('multipart/form-data'))
    return next(badRequest('send the CSV as multipart/form-data with the file in field "file"'));
  multerUpload(req, res, (err: unknown) => {
    if (err) {
      const e = err as { code?: string; message?: string };
      if (e.code === 'LIMIT_FILE_SIZE')
        return next(
          new HttpError(
            413,
            `the file is larger than the upload limit of ${Math.round(config.uploadLimitBytes / 1048576)} MB (PLUMBLINE_UPLOAD_LIMIT_MB)`,
          ),
        );
      if (e.code?.startsWith('LIMIT_')) return next(badRequest(`the upload was refused: ${e.message}`));
      return next(badRequest(`the upload could not be read: ${e.message ?? 'malformed multipart body'}`));
    }
    const file = req.file;
    if (file)
      res.on('close', () => {
        if (!(req as { fileKept?: boolean }).fileKept) void unlink(file.path).catch(() => undefined);
      });
    next();
  });
};

export async function createUpload(req: Request, res: Response) {
  const file = req.file as HashedFile | undefined;
  if (!file) throw badRequest('no file: send the CSV in the multipart field "file"');
  const fields = uploadFields.safeParse(req.body ?? {});
  if (!fields.success) throw badRequest(`invalid fields: ${zodMessage(fields.error)}`);
  // From here the service owns the temp file (it deletes it on refusal).
  (req as { fileKept?: boolean }).fileKept = true;
  const result = await uploads.createUpload(
    currentUser(req),
    { path: file.path, originalName: file.originalname, sha256: file.sha256, bytes: file.size },
    fields.data,
    sourceIp(req),
  );
  res.status(201).json(result);
}

const ownUpload = async (req: Request) => {
  const id = String(req.params.id);
  await uploads.assertOwner(currentUser(req), id);
  return id;
};

export async function listCohorts(req: Request, res: Response) {
  const q = req.query as unknown as Parameters<typeof cohorts.listCohorts>[0];
  res.json(await cohorts.listCohorts(q));
}
export async function getCohort(req: Request, res: Response) {
  res.json(await cohorts.getCohort(String(req.params.id)));
}
export async function getVersion(req: Request, res: Response) {
  res.json({ version: await cohorts.getCohortVersion(String(req.params.id), Number(req.params.version)) });
}
export async function listRows(req: Request, res: Response) {
  res.json(await cohorts.listCohortRows(String(req.params.id), Number(req.params.version), req.query as never));
}
export async function listUploads(req: Request, res: Response) {
  res.json({ uploads: await uploads.listMyUploads(currentUser(req)) });
}
export async function getUpload(req: Request, res: Response) {
  const id = await ownUpload(req);
  const { waitSeconds } = req.query as unknown as { waitSeconds: number };
  res.json({ upload: await uploads.getUpload(id, waitSeconds) });
}
export async function postMapping(req: Request, res: Response) {
  const id = await ownUpload(req);
  res.status(202).json({
    upload: await uploads.applyMapping(currentUser(req), id, req.body.mapping, sourceIp(req), req.body.saveAs),
  });
}
export async function listRejections(req: Request, res: Response) {
  const id = await ownUpload(req);
  const q = req.query as unknown as { page: number; pageSize: number };
  res.json(await rejections.listRejections(id, q.page, q.pageSize));
}
export async function rejectionsCsv(req: Request, res: Response) {
  const id = await ownUpload(req);
  res.setHeader('Content-Type', 'text/csv; charset=utf-8');
  res.setHeader('Content-Disposition', `attachment; filename="rejected-rows-${id.slice(0, 8)}.csv"`);
  for await (const chunk of rejections.rejectionsCsv(id)) res.write(chunk);
  res.end();
}
export async function commit(req: Request, res: Response) {
  const id = await ownUpload(req);
  res
    .status(201)
    .json(
      await uploads.commitUpload(currentUser(req), id, req.body.excludeRejected, sourceIp(req), req.body.excludeLines),
    );
}
export async function discard(req: Request, res: Response) {
  const id = await ownUpload(req);
  res.json({ upload: await uploads.discardUpload(currentUser(req), id, sourceIp(req)) });
}
export async function listMappings(req: Request, res: Response) {
  res.json({ mappings: await cohorts.listMappings((req.query as { cohortId?: string }).cohortId) });
}
export async function saveMapping(req: Request, res: Response) {
  res.status(201).json({ mapping: await cohorts.saveMapping(currentUser(req), req.body, sourceIp(req)) });
}
export async function scoreVersionChoices(_req: Request, res: Response) {
  res.json({ scoreVersions: await uploadScoreVersions() });
}
