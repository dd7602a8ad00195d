import 'reflect-metadata';
import { createApp } from './app';
import { config } from './config';
import { closeDatabase, initDatabase } from './db/dataSource';
import { startChecks, StartRefused } from './db/startChecks';
import { backgroundServices, startBackgroundServices, stopBackgroundServices } from './services/background';
import { startFakeSmtp } from './services/fakeSmtp';
import { stopPools } from './workers/pool';
import { logger } from './observability/log';
import { startProcessMetrics } from './observability/metrics';

async function main() {
  // Migrations and the runtime role's grants as the owner; then the API's own connection as the runtime role.
  await initDatabase(true);
  await startChecks();
  startProcessMetrics();
  const app = createApp();
  const server = app.listen(config.port, '127.0.0.1', () => {
    logger.info({ port: config.port, nodeEnv: config.nodeEnv, jobs: config.jobs }, `Plumbline is serving on http://localhost:${config.port} (${config.nodeEnv}${config.jobs ? '' : ', API only: jobs run in `npm run worker`'})`);
  });
  // Background work starts here, explicitly: the job workers unless PLUMBLINE_JOBS=off. Development: a loopback mail
  // server for the outbox page (docker-free-dev.sh sets PLUMBLINE_FAKE_SMTP=1).
  const fakeSmtp = config.fakeSmtp ? [() => startFakeSmtp()] : [];
  await startBackgroundServices([...fakeSmtp, ...backgroundServices()]);
  const stop = async (signal: string) => {
    logger.info({ signal }, 'stopping');
    server.close();
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
  else logger.fatal({ err }, 'Plumbline failed to start');
  await closeDatabase().catch(() => undefined);
  logger.flush();
  process.exit(1);
});
