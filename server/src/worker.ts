// `npm run worker`: a jobs-only process (no HTTP). It migrates as the owner like the server, then runs the job
// workers (runs, upload checks, e-mail, drift rules, the stale-upload sweep) as the runtime role. Run one or more
// beside API processes started with PLUMBLINE_JOBS=off (README, "Several processes").
import 'reflect-metadata';
import { prepareProcess, runMain, stopOnSignals } from './processLifecycle';
import { backgroundServices, startBackgroundServices } from './jobs/background';
import { logger } from './platform/observability/log';

runMain('Plumbline job worker', async () => {
  await prepareProcess();
  await startBackgroundServices(backgroundServices({ http: false, jobs: true }));
  logger.info({ pid: process.pid }, 'Plumbline job worker started');
  stopOnSignals();
});
