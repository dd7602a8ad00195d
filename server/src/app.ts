import express, { type RequestHandler } from 'express';
import helmet from 'helmet';
import { existsSync } from 'node:fs';
import type { IncomingMessage, ServerResponse } from 'node:http';
import path from 'node:path';
import { config } from './config';
import { errorHandler, HttpError } from './middleware/errors';
import { refuseBadText } from './middleware/textGuard';
import { markWrites } from './middleware/writeGeneration';
import { keptAnswers, mountRoutes, recordHeaders } from './routes/define';
import { routes } from './routes/table';

/** PLUMBLINE_TRUST_PROXY as Express reads 'trust proxy': a hop count, true/false, or addresses and subnets. */
export function trustProxySetting(value: string): boolean | number | string {
  const v = value.trim();
  if (v === '' || v === 'false') return false;
  if (v === 'true') return true;
  if (/^\d+$/.test(v)) return Number(v);
  return v;
}

const noStore: RequestHandler = (_req, res, next) => {
  res.setHeader('Cache-Control', 'no-store');
  next();
};

/** Builds the app without listening, so tests drive it directly and only index.ts listens. */
export function createApp(options: { serveClient?: boolean } = {}) {
  const app = express();
  // X-Forwarded-For decides the address that sign-in limits and the audit trail see, so it is believed only from a
  // proxy the operator names (PLUMBLINE_TRUST_PROXY); by default nothing is trusted and the socket's address counts.
  app.set('trust proxy', trustProxySetting(config.trustProxy));
  app.disable('x-powered-by');
  // First, so that every state-changing request invalidates the kept read answers (services/responseCache.ts).
  app.use(markWrites);
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
  app.use('/api', noStore);
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

  // Kept answers of the busiest reads go out before Express runs, with the headers securityHeaders sets (recorded
  // once); every other request, and every miss or refusal, takes the full chain above (routes/define.ts, keptAnswers).
  // app.handle is what both app.listen's server and supertest call for each request.
  const answerKept = keptAnswers(routes, [...recordHeaders(securityHeaders), ...recordHeaders(noStore)]);
  const expressHandle = (app as unknown as { handle: (req: IncomingMessage, res: ServerResponse, done?: unknown) => void }).handle.bind(app);
  (app as unknown as { handle: typeof expressHandle }).handle = (req, res, done) => {
    const answered = answerKept(req, res);
    if (answered === false) return expressHandle(req, res, done);
    answered.then((sent) => sent || expressHandle(req, res, done), () => expressHandle(req, res, done));
  };
  return app;
}
