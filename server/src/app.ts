import express from 'express';
import helmet from 'helmet';
import { existsSync } from 'node:fs';
import path from 'node:path';
import { config } from './config';
import { errorHandler, HttpError } from './middleware/errors';
import { refuseBadText } from './middleware/textGuard';
import { mountRoutes } from './routes/define';
import { routes } from './routes/table';

/** Builds the app without listening, so tests drive it directly and only index.ts listens. */
export function createApp(options: { serveClient?: boolean } = {}) {
  const app = express();
  app.set('trust proxy', 'loopback');
  app.disable('x-powered-by');
  app.use(
    helmet({
      contentSecurityPolicy: {
        directives: {
          defaultSrc: ["'self'"],
          scriptSrc: ["'self'"],
          // Vuetify sets theme variables in a <style> element at run time.
          styleSrc: ["'self'", "'unsafe-inline'"],
          imgSrc: ["'self'", 'data:', 'blob:'],
          fontSrc: ["'self'"],
          connectSrc: ["'self'"],
          objectSrc: ["'none'"],
          frameAncestors: ["'none'"],
        },
      },
    }),
  );
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
