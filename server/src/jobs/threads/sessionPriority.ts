// The PostgreSQL side of a long upload check gives way to the backends answering the API, as the checking thread itself
// does (its pool lowers its threads' priority: jobs/threads/pool.ts, piscina's niceIncrement). Background sessions only.
import { readFileSync } from 'node:fs';
import { getPriority, setPriority } from 'node:os';
import { config } from '../../platform/config';

/** Nice value of background work (0 = normal … 19 = lowest): PLUMBLINE_WORKER_NICE. */
export const WORKER_NICE = config.workerNice;

/**
 * Lowers the CPU priority of the PostgreSQL backend serving one of our background connections (the upload check's
 * COPY), so the database side of a long upload also gives way to the backends answering the API. Only for a server on
 * this machine (loopback or a socket path), only for a process the kernel names "postgres", and only where the
 * operating system lets us (the same user, or root); anywhere else it does nothing and the session runs as before.
 */
export async function lowerDatabaseSessionPriority(
  client: { query: (sql: string) => Promise<{ rows: { pid: number }[] }> },
  host: string,
  nice = WORKER_NICE,
): Promise<boolean> {
  if (process.platform !== 'linux' || nice === 0) return false;
  if (!(host === 'localhost' || host === '127.0.0.1' || host === '::1' || host.startsWith('/'))) return false;
  try {
    const {
      rows: [{ pid }],
    } = await client.query('SELECT pg_backend_pid() AS pid');
    if (readFileSync(`/proc/${pid}/comm`, 'utf8').trim() !== 'postgres') return false;
    if (getPriority(pid) >= nice) return false;
    setPriority(pid, nice);
    return true;
  } catch {
    return false;
  }
}
