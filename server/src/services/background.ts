// Long-lived work that runs beside the HTTP server (run queue, e-mail retries, drift checks).
// Each feature registers a starter here so index.ts and the tests start the same set.
type Stopper = () => Promise<void> | void;
type Starter = () => Promise<Stopper | void> | Stopper | void;

const starters: Starter[] = [];
let stoppers: Stopper[] = [];

export function registerBackground(start: Starter): void {
  starters.push(start);
}

export async function startBackgroundServices(): Promise<void> {
  for (const start of starters) {
    const stop = await start();
    if (stop) stoppers.push(stop);
  }
}

export async function stopBackgroundServices(): Promise<void> {
  for (const stop of stoppers.reverse()) await stop();
  stoppers = [];
}
