import { logger } from '../../platform/observability/log';
import type { ErrorRequestHandler, Request, RequestHandler, Response } from 'express';
import { ZodError } from 'zod';
import { DomainError, zodMessage, type DomainErrorKind } from '../../domain/errors';

export { zodMessage };

/** The one place a domain failure becomes an HTTP status. */
export const STATUS_OF: Record<DomainErrorKind, number> = {
  invalid: 400,
  'not-signed-in': 401,
  forbidden: 403,
  'not-found': 404,
  conflict: 409,
  'not-text': 415,
  refused: 422,
  'too-many-tries': 429,
  failed: 500,
  unavailable: 503,
};

/** A known failure with an HTTP status and a message that is safe to show. */
export class HttpError extends Error {
  constructor(
    public status: number,
    message: string,
    public details?: unknown,
  ) {
    super(message);
  }
}

export const badRequest = (message: string, details?: unknown) => new HttpError(400, message, details);
export const notFound = (what: string) => new HttpError(404, `${what} not found`);
export const forbidden = (message = 'your role may not do this') => new HttpError(403, message);
export const conflict = (message: string, details?: unknown) => new HttpError(409, message, details);

/** PostgreSQL connection failures: the API answers 503 rather than 500. */
export function isDatabaseDown(err: unknown): boolean {
  const e = err as { code?: string; message?: string } | undefined;
  if (!e) return false;
  // 57P01/57P02/57P03: admin, crash or start-up shutdown; 08xxx: connection exceptions; 53300: too many connections.
  if (
    e.code &&
    [
      'ECONNREFUSED',
      'ECONNRESET',
      'ETIMEDOUT',
      'EPIPE',
      'EHOSTUNREACH',
      '57P01',
      '57P02',
      '57P03',
      '08000',
      '08006',
      '08001',
      '08003',
      '08004',
      '53300',
    ].includes(e.code)
  )
    return true;
  return /Connection terminated|connect ECONNREFUSED|timeout exceeded when trying to connect|Connection is not established|terminating connection due to|the database system is (starting up|shutting down|in recovery mode)/i.test(
    e.message ?? '',
  );
}

export const notFoundHandler: RequestHandler = (req, _res, next) => {
  next(new HttpError(404, `no route ${req.method} ${req.path}`));
};

// One place turns every error into JSON; stack traces and SQL stay in the server log.
export const errorHandler: ErrorRequestHandler = (err, req, res, _next) => {
  if (res.headersSent) return;
  if (req.complete || !req.readable) {
    sendError(err, req, res);
    return;
  }
  // Refused before the body was read (e.g. a 403 on an upload): read up to DRAIN_LIMIT of it first, so the client
  // receives the answer rather than a broken pipe; beyond that, answer and close the connection.
  let seen = 0;
  let done = false;
  const finish = () => {
    if (done) return;
    done = true;
    req.removeListener('data', onData);
    if (!req.complete) res.setHeader('Connection', 'close');
    sendError(err, req, res);
  };
  const onData = (chunk: Buffer) => {
    seen += chunk.length;
    if (seen > DRAIN_LIMIT) finish();
  };
  req.on('data', onData);
  req.once('end', finish);
  req.once('error', finish);
  req.once('close', finish);
  req.resume();
};

const DRAIN_LIMIT = 16 * 1024 * 1024;

function sendError(err: unknown, req: Request, res: Response): void {
  if (res.headersSent) return;
  const known =
    err instanceof DomainError
      ? { status: STATUS_OF[err.kind], message: err.message, details: err.details }
      : err instanceof HttpError
        ? err
        : null;
  if (known) {
    if (known.status >= 500) res.err = err as Error; // written with the request's log line, with its own stack
    res
      .status(known.status)
      .json({ error: known.message, ...(known.details !== undefined ? { details: known.details } : {}) });
    return;
  }
  if (err instanceof ZodError) {
    res.status(400).json({ error: zodMessage(err) });
    return;
  }
  const e = err as { type?: string; status?: number; code?: string; message?: string };
  if (e?.type === 'entity.parse.failed') {
    res.status(400).json({ error: 'request body is not valid JSON' });
    return;
  }
  if (e?.type === 'entity.too.large') {
    res.status(413).json({ error: 'request body is too large' });
    return;
  }
  if (e?.type === 'charset.unsupported' || e?.type === 'encoding.unsupported') {
    res.status(415).json({ error: 'unsupported body encoding' });
    return;
  }
  if (typeof e?.status === 'number' && e.status >= 400 && e.status < 500) {
    res.status(e.status).json({ error: 'bad request' });
    return;
  }
  if (e?.code === 'P0001') {
    res.status(409).json({ error: 'this record is immutable and cannot be changed' });
    return;
  }
  if (isDatabaseDown(err)) {
    res.status(503).json({ error: 'the database is unavailable; try again shortly' });
    return;
  }
  // pino-http writes it with the request's line (request id, route), at error level; never into the answer.
  res.err = err as Error;
  if (!req.log) logger.error({ err, method: req.method, path: req.path }, 'request failed');
  res.status(500).json({ error: 'internal error' });
}
