// Marks every state-changing API request (anything but GET, HEAD, OPTIONS) in the write generation of
// services/responseCache.ts: once just before its answer is written — after the handler's transaction committed — and
// once more when the request closes (covers a client that went away, whose handler may still commit later; its
// res.end still runs and marks it then). Kept answers and account rows read before the mark are not used after it.
import type { RequestHandler } from 'express';
import { noteWrite } from '../services/responseCache';

const READS = new Set(['GET', 'HEAD', 'OPTIONS']);

export const markWrites: RequestHandler = (req, res, next) => {
  if (READS.has(req.method)) return next();
  const writeHead = res.writeHead;
  const end = res.end;
  res.writeHead = function (this: typeof res, ...args: unknown[]) {
    noteWrite();
    return (writeHead as (...a: unknown[]) => typeof res).apply(this, args);
  } as typeof res.writeHead;
  res.end = function (this: typeof res, ...args: unknown[]) {
    noteWrite();
    return (end as (...a: unknown[]) => typeof res).apply(this, args);
  } as typeof res.end;
  res.on('close', noteWrite);
  next();
};
