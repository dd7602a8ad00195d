// Long-lived work beside the HTTP server: the run queue, upload upkeep (interrupted checks, the stale-upload sweep),
// the outbox sender and the adequacy-widths warm-up. Nothing starts when a module is imported: the entry point
// (server/src/index.ts) — or a test — calls startBackgroundServices(), and the list below is the whole of it.
import { config } from '../config';
import { startMailSender } from './mail';
import { startWidthsWarmUp } from './adequacyWidths';
import { startRunQueue } from './runs';
import { startUploadUpkeep } from './uploads';

type Stopper = () => Promise<void> | void;
export type Starter = () => Promise<Stopper | void> | Stopper | void;

/** The background services a full process runs, in start order. */
export function backgroundServices(): Starter[] {
  const list: Starter[] = [startRunQueue, startUploadUpkeep, startWidthsWarmUp];
  // PLUMBLINE_MAIL_SENDER=off leaves the outbox untouched (e.g. to inspect pending rows); tests call sendPendingOnce().
  if (config.mailSender) list.push(() => startMailSender());
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
