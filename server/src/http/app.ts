import express from 'express';
import helmet from 'helmet';
import { existsSync } from 'node:fs';
import path from 'node:path';
import { config } from '../platform/config';
import { errorHandler, HttpError } from './middleware/errors';
import { refuseBadText } from './middleware/textGuard';
import { apiCacheHeaders } from './middleware/cacheHeaders';
import type { Logger } from 'pino';
import { requestLogger } from '../platform/observability/log';
import { timeRequests } from '../platform/observability/metrics';
import { mountRoutes } from './routes/define';
import { routes } from './routes/table';

/** PLUMBLINE_TRUST_PROXY as Express reads 'trust proxy': a hop count, true/false, or addresses and subnets. */
export function trustProxySetting(value: string): boolean | number | string {
  const v = value.trim();
  if (v === '' || v === 'false') return false;
  if (v === 'true') return true;
  if (/^\d+$/.test(v)) return Number(v);
  return v;
}

/** Builds the app without listening, so tests drive it directly and only index.ts listens. */
export function createApp(options: { serveClient?: boolean; log?: Logger } = {}) {
  const app = express();
  // X-Forwarded-For decides the address that sign-in limits and the audit trail see, so it is believed only from a
  // proxy the operator names (PLUMBLINE_TRUST_PROXY); by default nothing is trusted and the socket's address counts.
  app.set('trust proxy', trustProxySetting(config.trustProxy));
  app.disable('x-powered-by');
  // First, so every answer (refusals and errors included) gets a request id, one log line and a duration.
  app.use('/api', requestLogger(options.log), timeRequests);
  const securityHeaders = helmet({
    contentSecurityPolicy: {
      directives: {
        defaultSrc: ["'self'"],
        // Scripts only from our own files: no inline scripts, no eval (the client switches off zod's eval probe,
        // client/src/zodConfig.ts), no inline event handlers (helmet's default script-src-attr 'none').
        // tests/browser/csp.test.ts loads the built client in Chromium and fails on any violation.
        scriptSrc: ["'self'"],
        // Styles: Vuetify writes its theme variables into a <style> element at run time, which needs
        // 'unsafe-inline' (checked in Chromium: with style-src 'self' that element is the only thing refused; Vue
        // and Chart.js set element styles through the CSSOM, which CSP does not govern). A nonce would need a
        // per-response index.html; inline styles cannot run code, so the simpler rule is kept.
        styleSrc: ["'self'", "'unsafe-inline'"],
        imgSrc: ["'self'", 'data:', 'blob:'],
        fontSrc: ["'self'"],
        connectSrc: ["'self'"],
        objectSrc: ["'none'"],
        frameAncestors: ["'none'"],
      },
    },
  });
  app.use(securityHeaders);
  // API answers carry patient-derived rows, tokens and account data: no browser or proxy may keep a copy.
  app.use('/api', apiCacheHeaders);
  app.use('/api', express.json({ limit: '1mb' }));
  app.use('/api', refuseBadText);

  const api = express.Router();
  mountRoutes(api, routes);
  app.use(api);
  app.use('/api', (req, _res, next) => next(new HttpError(404, `no route ${req.method} ${req.originalUrl}`)));

  const clientDir = path.resolve(config.clientDir);
  if (options.serveClient !== false && existsSync(path.join(clientDir, 'index.html'))) {
    app.use(express.static(clientDir, { index: false, maxAge: '1h' }));
    app.get('/{*splat}', (_req, res) => res.sendFile(path.join(clientDir, 'index.html')));
  }
  app.use(errorHandler);

  return app;
}
