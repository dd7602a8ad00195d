// `npm run worker`: a jobs-only process (no HTTP). It migrates as the owner like the server, then runs the job
// workers (runs, upload checks, e-mail, drift rules, the stale-upload sweep) as the runtime role. Run one or more
// beside API processes started with PLUMBLINE_JOBS=off (README, "Several processes").
import 'reflect-metadata';
import { closeDatabase, initDatabase } from './db/dataSource';
import { startChecks, StartRefused } from './db/startChecks';
import { backgroundServices, startBackgroundServices, stopBackgroundServices } from './services/background';
import { stopPools } from './workers/pool';
import { logger } from './observability/log';
import { startProcessMetrics } from './observability/metrics';

async function main() {
  await initDatabase(true);
  await startChecks();
  startProcessMetrics();
  await startBackgroundServices(backgroundServices({ http: false, jobs: true }));
  logger.info({ pid: process.pid }, 'Plumbline job worker started');
  let stopping = false;
  const stop = async (signal: string) => {
    if (stopping) return;
    stopping = true;
    logger.info({ signal }, 'stopping');
    await stopBackgroundServices();
    await stopPools();
    await closeDatabase();
    logger.flush();
    process.exit(0);
  };
  process.on('SIGINT', () => void stop('SIGINT'));
  process.on('SIGTERM', () => void stop('SIGTERM'));
}

main().catch(async (err) => {
  if (err instanceof StartRefused) logger.fatal(`Plumbline refuses to start: ${err.message}`);
  else logger.fatal({ err }, 'Plumbline job worker failed to start');
  await closeDatabase().catch(() => undefined);
  logger.flush();
  process.exit(1);
});
