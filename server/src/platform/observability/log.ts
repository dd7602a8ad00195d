// Structured JSON logs (pino) for the whole server, and the per-request logger (pino-http) with a request id.
// Secrets never reach a log line: the Authorization header, cookies and any password field are redacted.
import { randomUUID } from 'node:crypto';
import type { IncomingMessage, ServerResponse } from 'node:http';
import pino, { type DestinationStream, type Logger } from 'pino';
import { pinoHttp } from 'pino-http';
import { config } from '../config';

const PASSWORD_FIELDS = ['password', 'currentPassword', 'newPassword', 'passwordHash', 'password_hash'];

export const REDACT_PATHS = [
  'req.headers.authorization',
  'req.headers.cookie',
  'req.headers["proxy-authorization"]',
  'res.headers["set-cookie"]',
  ...PASSWORD_FIELDS,
  ...PASSWORD_FIELDS.map((f) => `*.${f}`),
  ...PASSWORD_FIELDS.map((f) => `*.*.${f}`),
];

/** A logger with the project's settings; tests pass their own destination to read what it writes. */
export function createLogger(destination?: DestinationStream, level = config.logLevel): Logger {
  return pino(
    { level, base: { service: 'plumbline', pid: process.pid }, redact: { paths: REDACT_PATHS, censor: '[redacted]' } },
    destination,
  );
}

export const logger = createLogger();

// A request id from the reverse proxy is kept if it looks like one (so a request can be followed across the proxy and
// every API process); otherwise a new one. Sent back as X-Request-Id.
const REQUEST_ID = /^[A-Za-z0-9._:-]{8,100}$/;

export function requestLogger(log: Logger = logger) {
  return pinoHttp({
    logger: log,
    genReqId: (req: IncomingMessage, res: ServerResponse) => {
      const given = req.headers['x-request-id'];
      const id = typeof given === 'string' && REQUEST_ID.test(given) ? given : randomUUID();
      res.setHeader('X-Request-Id', id);
      return id;
    },
    // One line per request: error for 5xx (with the error), info for the rest (refusals included).
    customLogLevel: (_req, res, err) => (err || res.statusCode >= 500 ? 'error' : 'info'),
    // The path without its query string: queries can carry search text typed by a person.
    serializers: {
      req: (req: {
        id: unknown;
        method: string;
        url: string;
        headers: Record<string, unknown>;
        remoteAddress?: string;
      }) => ({
        id: req.id,
        method: req.method,
        url: String(req.url).split('?')[0],
        headers: req.headers,
        remoteAddress: req.remoteAddress,
      }),
      // The status only: the answer's headers are the same security headers every time.
      res: (res: { statusCode: number }) => ({ statusCode: res.statusCode }),
    },
  });
}
