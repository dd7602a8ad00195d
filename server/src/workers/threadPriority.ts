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
import { readFileSync } from 'node:fs';
import { getPriority, setPriority } from 'node:os';
import { isMainThread } from 'node:worker_threads';
import { config } from '../config';

/** Nice value for worker threads (0 = normal … 19 = lowest); PLUMBLINE_WORKER_NICE overrides, as for upload checks. */
export const WORKER_NICE = config.workerNice;

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

/**
 * Lowers the CPU priority of the PostgreSQL backend serving one of our background connections (the upload check's
 * COPY), so the database side of a long upload also gives way to the backends answering the API. Only for a server on
 * this machine (loopback or a socket path), only for a process the kernel names "postgres", and only where the
 * operating system lets us (the same user, or root); anywhere else it does nothing and the session runs as before.
 */
export async function lowerDatabaseSessionPriority(client: { query: (sql: string) => Promise<{ rows: { pid: number }[] }> }, host: string, nice = WORKER_NICE): Promise<boolean> {
  if (process.platform !== 'linux' || nice === 0) return false;
  if (!(host === 'localhost' || host === '127.0.0.1' || host === '::1' || host.startsWith('/'))) return false;
  try {
    const { rows: [{ pid }] } = await client.query('SELECT pg_backend_pid() AS pid');
    if (readFileSync(`/proc/${pid}/comm`, 'utf8').trim() !== 'postgres') return false;
    if (getPriority(pid) >= nice) return false;
    setPriority(pid, nice);
    return true;
  } catch {
    return false;
  }
}
