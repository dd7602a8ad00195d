import 'reflect-metadata';
import { createApp } from './app';
import { config } from './config';
import { closeDatabase, initDatabase } from './db/dataSource';
import { backgroundServices, startBackgroundServices, stopBackgroundServices } from './services/background';
import { startFakeSmtp } from './services/fakeSmtp';
import { stopRowsThread } from './services/rowsThread';
import { logger } from './observability/log';
import { startProcessMetrics } from './observability/metrics';

async function main() {
  await initDatabase(true);
  startProcessMetrics();
  const app = createApp();
  const server = app.listen(config.port, '127.0.0.1', () => {
    logger.info({ port: config.port }, `Plumbline is serving on http://localhost:${config.port}`);
  });
  // Background work starts here, explicitly. Development: a loopback mail server for the outbox page
  // (docker-free-dev.sh sets PLUMBLINE_FAKE_SMTP=1).
  const fakeSmtp = process.env.PLUMBLINE_FAKE_SMTP === '1' ? [() => startFakeSmtp()] : [];
  await startBackgroundServices([...fakeSmtp, ...backgroundServices()]);
  const stop = async (signal: string) => {
    logger.info({ signal }, 'stopping');
    server.close();
    await stopBackgroundServices();
    await stopRowsThread();
    await closeDatabase();
    logger.flush();
    process.exit(0);
  };
  process.on('SIGINT', () => void stop('SIGINT'));
  process.on('SIGTERM', () => void stop('SIGTERM'));
}

main().catch((err) => {
  logger.fatal({ err }, 'Plumbline failed to start');
  process.exit(1);
});
