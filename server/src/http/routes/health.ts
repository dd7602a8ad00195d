import type { Request, Response } from 'express';
import { config } from '../../platform/config';
import { HttpError } from '../middleware/errors';
import { registry } from '../../platform/observability/metrics';
import { queueDepth } from '../../jobs/queueDepth';

/** The database, and the shared background queue as every process sees it (read from PostgreSQL). */
export async function health(_req: Request, res: Response) {
  try {
    const counts = await queueDepth();
    const count = (queue: string, state: string) =>
      counts.find((c) => c.queue === queue && c.state === state)?.count ?? 0;
    res.json({
      status: 'ok',
      database: 'up',
      queue: {
        runs: { queued: count('runs', 'queued'), running: count('runs', 'running') },
        uploadChecks: { running: count('upload_checks', 'running') },
        mail: { pending: count('mail', 'pending') },
        // pg-boss's jobs per queue: waiting (created or retry) and active (claimed by a live or crashed process).
        jobs: Object.fromEntries(
          counts
            .filter((c) => c.queue.startsWith('job:') && c.state === 'waiting')
            .map((c) => [c.queue.slice(4), { waiting: c.count, active: count(c.queue, 'active') }]),
        ),
      },
    });
  } catch {
    res.status(503).json({ status: 'degraded', database: 'down', queue: null });
  }
}

/** Prometheus text format; with PLUMBLINE_METRICS_TOKEN set, only for a scraper that presents it. */
export async function metrics(req: Request, res: Response) {
  if (config.metricsToken && req.headers.authorization !== `Bearer ${config.metricsToken}`)
    throw new HttpError(401, 'the metrics need the scrape token');
  res.setHeader('Content-Type', registry.contentType);
  res.send(await registry.metrics());
}
