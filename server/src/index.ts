import 'reflect-metadata';
import { createApp } from './app';
import { config } from './config';
import { closeDatabase, initDatabase } from './db/dataSource';
import { startChecks, StartRefused } from './db/startChecks';
import { registerBackground, startBackgroundServices, stopBackgroundServices } from './services/background';
import { startFakeSmtp } from './services/fakeSmtp';

// Development: a loopback mail server for the outbox page (docker-free-dev.sh sets PLUMBLINE_FAKE_SMTP=1).
if (config.fakeSmtp) registerBackground(() => startFakeSmtp());

async function main() {
  // Migrations and the runtime role's grants as the owner; then the API's own connection as the runtime role.
  await initDatabase(true);
  await startChecks();
  const app = createApp();
  const server = app.listen(config.port, '127.0.0.1', () => {
    console.log(`Plumbline is serving on http://localhost:${config.port} (${config.nodeEnv})`);
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

main().catch(async (err) => {
  if (err instanceof StartRefused) console.error(`Plumbline refuses to start: ${err.message}`);
  else console.error('Plumbline failed to start:', err);
  await closeDatabase().catch(() => undefined);
  process.exit(1);
});
