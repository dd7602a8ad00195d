// Worker thread: runs bootstrap replicates [from, to) of the full metric set and posts the metric rows back.
import { parentPort, workerData } from 'node:worker_threads';
import { runReplicates } from '../stats/bootstrap';
import type { ValidationSettings } from '@shared/validation';
import { lowerThisThreadPriority } from './threadPriority';

// Replicates are background CPU work: this thread yields to the API thread (per-thread nice value, threadPriority.ts).
lowerThisThreadPriority();
const { p, y, settings, from, to } = workerData as { p: Float64Array; y: Uint8Array; settings: ValidationSettings; from: number; to: number };
parentPort!.postMessage(runReplicates(p, y, settings, from, to));
