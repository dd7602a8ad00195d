// How much background work waits or is under way, read from PostgreSQL so every process reports the shared queue:
// the records' own states (runs queued and running, checks under way, e-mails pending) and pg-boss's jobs per queue.
import { Gauge } from 'prom-client';
import { dataSource } from '../platform/database/dataSource';
import { registry } from '../platform/observability/metrics';
import { jobCounts } from './queue';

export interface QueueCount {
  queue: string;
  state: string;
  count: number;
}

export async function queueDepth(): Promise<QueueCount[]> {
  if (!dataSource.isInitialized) throw new Error('the database is not connected');
  const rows: { queue: QueueCount['queue']; state: string; n: string }[] = await dataSource.query(`
    SELECT 'runs' AS queue, status AS state, count(*)::text AS n FROM validation_runs WHERE status IN ('queued', 'running') GROUP BY status
    UNION ALL SELECT 'upload_checks', 'running', count(*)::text FROM cohort_uploads WHERE status = 'processing'
    UNION ALL SELECT 'mail', 'pending', count(*)::text FROM email_outbox WHERE status = 'pending'`);
  const out: QueueCount[] = [
    { queue: 'runs', state: 'queued', count: 0 },
    { queue: 'runs', state: 'running', count: 0 },
  ];
  for (const r of rows) {
    const existing = out.find((o) => o.queue === r.queue && o.state === r.state);
    if (existing) existing.count = Number(r.n);
    else out.push({ queue: r.queue, state: r.state, count: Number(r.n) });
  }
  for (const j of await jobCounts()) {
    out.push(
      { queue: `job:${j.name}`, state: 'waiting', count: j.waiting },
      { queue: `job:${j.name}`, state: 'active', count: j.active },
    );
  }
  return out;
}

// Read from PostgreSQL at scrape time, so every process reports the same shared queue (GET /api/metrics).
new Gauge({
  name: 'plumbline_queue_depth',
  help: 'Background work waiting or under way, from the database (the same for every process)',
  labelNames: ['queue', 'state'] as const,
  registers: [registry],
  async collect() {
    this.reset();
    for (const q of await queueDepth()) this.set({ queue: q.queue, state: q.state }, q.count);
  },
});
