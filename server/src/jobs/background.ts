// Long-lived work beside (or instead of) the HTTP server. Nothing starts when a module is imported: the entry points
// (server/src/index.ts, server/src/worker.ts) — or a test — call startBackgroundServices(), and the lists below are
// the whole of it. Job workers run where PLUMBLINE_JOBS is on (the default single process) or in `npm run worker`.
import { config } from '../platform/config';
import { startJobs, JOB, type JobHandler, type JobName } from './queue';
import { mailJob } from '../domain/notifications/mail';
import { startCiWidthsWarmUp } from '../domain/runs/adequacyWidths';
import { driftRulesJob, interruptRuns, runAbandonedJob, runJob } from '../domain/runs/runQueue';
import { uploadCheckAbandonedJob, uploadCheckJob } from '../domain/cohorts/uploads';
import { comparisonAbandonedJob, comparisonJob } from '../domain/comparisons/comparisonQueue';
import { startUploadUpkeep, uploadSweepJob } from '../domain/cohorts/uploadSweep';

type Stopper = () => Promise<void> | void;
export type Starter = () => Promise<Stopper | void> | Stopper | void;

/** Every job and who handles it; concurrency is workers per process (a run or check uses a thread of its own). */
function jobHandlers(): Partial<Record<JobName, { handler: JobHandler; concurrency?: number }>> {
  const h: Partial<Record<JobName, { handler: JobHandler; concurrency?: number }>> = {
    [JOB.run]: { handler: runJob as JobHandler },
    [JOB.runAbandoned]: { handler: runAbandonedJob as JobHandler },
    [JOB.comparison]: { handler: comparisonJob as JobHandler },
    [JOB.comparisonAbandoned]: { handler: comparisonAbandonedJob as JobHandler },
    [JOB.uploadCheck]: { handler: uploadCheckJob as JobHandler, concurrency: config.uploadThreads },
    [JOB.uploadCheckAbandoned]: { handler: uploadCheckAbandonedJob as JobHandler },
    [JOB.driftRules]: { handler: driftRulesJob as JobHandler },
    [JOB.uploadSweep]: { handler: uploadSweepJob },
  };
  // PLUMBLINE_MAIL_SENDER=off leaves the outbox untouched (e.g. to inspect pending rows); tests call sendPendingOnce().
  if (config.mailSender) h[JOB.mail] = { handler: mailJob as JobHandler, concurrency: 2 };
  return h;
}

/** The job workers of this process, and the stale-upload sweep as a pg-boss schedule (hourly, whichever process is up). */
export async function startJobWorkers(): Promise<Stopper> {
  const stop = await startJobs(jobHandlers(), [{ name: JOB.uploadSweep, cron: '17 * * * *' }]);
  return () => stop(interruptRuns);
}

/** The background services of a process: `http` for one that serves the API, `jobs` for one that runs jobs. */
export function backgroundServices(
  roles: { http: boolean; jobs: boolean } = { http: true, jobs: config.jobs },
): Starter[] {
  const list: Starter[] = [];
  if (roles.jobs) list.push(startJobWorkers);
  // Files a crash left in this host's upload folder; the widths warm-up fills this process's page cache.
  if (roles.http) list.push(startUploadUpkeep, startCiWidthsWarmUp);
  return list;
}

let stoppers: Stopper[] = [];

export async function startBackgroundServices(starters: Starter[] = backgroundServices()): Promise<void> {
  for (const start of starters) {
    const stop = await start();
    if (stop) stoppers.push(stop);
  }
}

export async function stopBackgroundServices(): Promise<void> {
  for (const stop of stoppers.reverse()) await stop();
  stoppers = [];
}
