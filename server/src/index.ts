import 'reflect-metadata';
import { createApp } from './app';
import { config } from './config';
import { closeDatabase, initDatabase } from './db/dataSource';
import { registerBackground, startBackgroundServices, stopBackgroundServices } from './services/background';
import { startFakeSmtp } from './services/fakeSmtp';

// Development: a loopback mail server for the outbox page (docker-free-dev.sh sets PLUMBLINE_FAKE_SMTP=1).
if (process.env.PLUMBLINE_FAKE_SMTP === '1') registerBackground(() => startFakeSmtp());

async function main() {
  await initDatabase(true);
  const app = createApp();
  const server = app.listen(config.port, '127.0.0.1', () => {
    console.log(`Plumbline is serving on http://localhost:${config.port}`);
  });
  await startBackgroundServices();
  const stop = async (signal: string) => {
    console.log(`Plumbline: ${signal} received, stopping`);
    server.close();
    await stopBackgroundServices();
    await closeDatabase();
    process.exit(0);
  };
  process.on('SIGINT', () => void stop('SIGINT'));
  process.on('SIGTERM', () => void stop('SIGTERM'));
}

main().catch((err) => {
  console.error('Plumbline failed to start:', err);
  process.exit(1);
});
