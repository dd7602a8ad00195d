import 'reflect-metadata';
import { createApp } from './http/app';
import { config } from './platform/config';
import { prepareProcess, runMain, stopOnSignals } from './processLifecycle';
import { backgroundServices, startBackgroundServices } from './jobs/background';
import { startFakeSmtp } from './platform/mail/fakeSmtp';
import { logger } from './platform/observability/log';

runMain('Plumbline', async () => {
  // Migrations and the runtime role's grants as the owner; then the API's own connection as the runtime role.
  await prepareProcess();
  const app = createApp();
  const server = app.listen(config.port, '127.0.0.1', () => {
    logger.info(
      { port: config.port, nodeEnv: config.nodeEnv, jobs: config.jobs },
      `Plumbline is serving on http://localhost:${config.port} (${config.nodeEnv}${config.jobs ? '' : ', API only: jobs run in `npm run worker`'})`,
    );
  });
  // Background work starts here, explicitly: the job workers unless PLUMBLINE_JOBS=off. Development: a loopback mail
  // server for the outbox page (docker-free-dev.sh sets PLUMBLINE_FAKE_SMTP=1).
  const fakeSmtp = config.fakeSmtp ? [() => startFakeSmtp()] : [];
  await startBackgroundServices([...fakeSmtp, ...backgroundServices()]);
  stopOnSignals(() => server.close());
});
