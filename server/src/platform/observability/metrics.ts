// Prometheus metrics (prom-client): request durations by route, job durations, and the process's own figures including
// event-loop delay (the queue depth gauge lives with what it reads, jobs/queueDepth.ts). Served by GET /api/metrics (http/routes/table.ts).
import type { RequestHandler } from 'express';
import { collectDefaultMetrics, Histogram, Registry } from 'prom-client';

export const registry = new Registry();

export const httpDuration = new Histogram({
  name: 'plumbline_http_request_duration_seconds',
  help: 'Time from a request arriving to its answer finishing, by route pattern',
  labelNames: ['method', 'route', 'status'] as const,
  buckets: [0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10],
  registers: [registry],
});

export const jobDuration = new Histogram({
  name: 'plumbline_job_duration_seconds',
  help: 'Time a background job took, by kind and outcome',
  labelNames: ['job', 'outcome'] as const,
  buckets: [0.1, 0.5, 1, 2.5, 5, 10, 30, 60, 120, 300, 900],
  registers: [registry],
});

let processMetrics = false;
/** Process figures (CPU, memory, event-loop delay histogram): started by the entry point, never by an import. */
export function startProcessMetrics(): void {
  if (processMetrics) return;
  processMetrics = true;
  collectDefaultMetrics({ register: registry, eventLoopMonitoringPrecision: 10 });
}

/** Times every API answer by its route pattern from http/routes/table.ts (never the raw path, which carries ids). */
export const timeRequests: RequestHandler = (req, res, next) => {
  const end = httpDuration.startTimer();
  res.on('finish', () => {
    const route = typeof req.route?.path === 'string' ? req.route.path : 'unmatched';
    end({ method: req.method, route, status: String(res.statusCode) });
  });
  next();
};

/** Times one job; returns what the job returned. */
export async function timeJob<T>(job: string, work: () => Promise<T>): Promise<T> {
  const end = jobDuration.startTimer({ job });
  try {
    const result = await work();
    end({ outcome: 'done' });
    return result;
  } catch (err) {
    end({ outcome: 'failed' });
    throw err;
  }
}
