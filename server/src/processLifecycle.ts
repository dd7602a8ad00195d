// How the two entry points (index.ts: the API, worker.ts: jobs only) start and stop, in one place.
import { closeDatabase, initDatabase } from './platform/database/dataSource';
import { startChecks, StartRefused } from './platform/database/startChecks';
import { stopBackgroundServices } from './jobs/background';
import { stopPools } from './jobs/threads/pool';
import { logger } from './platform/observability/log';
import { startProcessMetrics } from './platform/observability/metrics';

/** Migrations and the runtime role's grants as the owner, the refusals at start, then the process metrics. */
export async function prepareProcess(): Promise<void> {
  await initDatabase(true);
  await startChecks();
  startProcessMetrics();
}

/** SIGINT and SIGTERM stop once, in order: `first` (e.g. closing the HTTP server), background work, threads, database. */
export function stopOnSignals(first?: () => void): void {
  let stopping = false;
  const stop = async (signal: string) => {
    if (stopping) return;
    stopping = true;
    logger.info({ signal }, 'stopping');
    first?.();
    await stopBackgroundServices();
    await stopPools();
    await closeDatabase();
    logger.flush();
    process.exit(0);
  };
  process.on('SIGINT', () => void stop('SIGINT'));
  process.on('SIGTERM', () => void stop('SIGTERM'));
}

/** Runs an entry point's main; a refusal or failure at start is logged and ends the process with status 1. */
export function runMain(what: string, main: () => Promise<void>): void {
  main().catch(async (err) => {
    if (err instanceof StartRefused) logger.fatal(`Plumbline refuses to start: ${err.message}`);
    else logger.fatal({ err }, `${what} failed to start`);
    await closeDatabase().catch(() => undefined);
    logger.flush();
    process.exit(1);
  });
}
