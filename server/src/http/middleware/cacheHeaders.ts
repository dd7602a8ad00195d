// The one place that says how API answers may be cached (static client files get theirs from express.static).
// API answers carry patient-derived figures and governance records, so no browser or proxy keeps a copy: `no-store`.
// Express still gives every res.json answer a weak ETag and answers a matching If-None-Match with 304, so a client
// that asks conditionally is spared the body; freshness is always decided by this process reading PostgreSQL.
import type { RequestHandler } from 'express';

export const apiCacheHeaders: RequestHandler = (_req, res, next) => {
  res.setHeader('Cache-Control', 'no-store');
  next();
};
