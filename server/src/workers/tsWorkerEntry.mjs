// Entry for worker threads: registers tsx's TypeScript loader in this thread, then loads the .ts worker named in workerData.
import { register } from 'tsx/esm/api';
import { workerData } from 'node:worker_threads';

register();
await import(workerData.__script);
