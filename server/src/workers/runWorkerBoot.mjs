// Plain-JavaScript entry of the run worker thread: registers tsx inside the thread (with the project's tsconfig, so
// '@shared/…' paths resolve wherever the process was started), then loads the TypeScript worker.
import { workerData } from 'node:worker_threads';
import { register } from 'tsx/esm/api';

register({ tsconfig: workerData.tsconfig });
await import(workerData.workerFile);
