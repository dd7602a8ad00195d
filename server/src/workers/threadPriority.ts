// Background CPU work (validation runs, bootstrap replicates) gives way to the API thread when both want a core.
//
// On Linux the nice value belongs to each thread, not to the whole process (setpriority(2), "BUGS": with
// NPTL a call for "the process" with id 0 changes only the calling thread), and Node's worker threads are OS threads.
// So a worker thread that calls os.setPriority(0, n) at its start lowers only itself: the API's event loop keeps
// normal priority and the scheduler hands it the CPU first, which keeps read latency flat while a run computes.
// Raising the nice value needs no privilege; it cannot be lowered back later, and threads this one starts inherit it
// (the bootstrap workers a run might start are then low priority too — wanted). Elsewhere (macOS, Windows) the same
// call would lower the whole process, so it is made on Linux only. A refusal (containers with seccomp rules, say) is
// ignored: the work then runs at normal priority, as before.
import { setPriority } from 'node:os';
import { isMainThread } from 'node:worker_threads';

/** Nice value for worker threads (0 = normal … 19 = lowest); PLUMBLINE_WORKER_NICE overrides, as for upload checks. */
export const WORKER_NICE = (() => {
  const n = Number(process.env.PLUMBLINE_WORKER_NICE ?? 10);
  return Number.isInteger(n) && n >= 0 && n <= 19 ? n : 10;
})();

/** Lowers the CPU priority of the calling worker thread; returns whether it did. Never touches the main thread. */
export function lowerThisThreadPriority(nice = WORKER_NICE): boolean {
  if (isMainThread || process.platform !== 'linux' || nice === 0) return false;
  try {
    setPriority(0, nice);
    return true;
  } catch {
    return false;
  }
}
