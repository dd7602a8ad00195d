// The upload check's database session is lowered in priority like the check thread itself
// (server/src/jobs/threads/sessionPriority.ts), checked against the kernel's record of the backend process (proc(5):
// /proc/<pid>/stat, field 19 is the nice value). Linux, with PostgreSQL on this machine.
import { existsSync, readFileSync } from 'node:fs';
import pg from 'pg';
import { describe, expect, it } from 'vitest';
import { lowerDatabaseSessionPriority, WORKER_NICE } from '../../server/src/jobs/threads/sessionPriority';

const linux = process.platform === 'linux' && existsSync('/proc/self/stat');
const niceOf = (pid: number) => Number(readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1].split(' ')[16]);
const connect = async () => {
  const c = new pg.Client({
    host: process.env.PGHOST ?? '127.0.0.1',
    port: Number(process.env.PGPORT ?? 54329),
    user: process.env.PGUSER ?? 'postgres',
    password: process.env.PGPASSWORD,
    database: process.env.PGDATABASE,
  });
  await c.connect();
  const {
    rows: [{ pid }],
  } = await c.query('SELECT pg_backend_pid() AS pid');
  return { c, pid: pid as number };
};

describe.skipIf(!linux)('database session priority', () => {
  it('lowers the backend of that session only, and only for a server on this machine', async () => {
    const a = await connect();
    const b = await connect();
    try {
      const before = niceOf(a.pid);
      expect(await lowerDatabaseSessionPriority(a.c, 'db.example.org')).toBe(false); // not this machine: untouched
      expect(niceOf(a.pid)).toBe(before);
      const lowered = await lowerDatabaseSessionPriority(a.c, process.env.PGHOST ?? '127.0.0.1');
      // Allowed as root or as the user PostgreSQL runs as; refused (and harmless) otherwise.
      const mayRenice =
        process.getuid?.() === 0 ||
        readFileSync(`/proc/${a.pid}/status`, 'utf8').includes(`Uid:\t${process.getuid?.()}\t`);
      if (mayRenice && before < WORKER_NICE) {
        expect(lowered).toBe(true);
        expect(niceOf(a.pid)).toBe(WORKER_NICE);
      } else expect(niceOf(a.pid)).toBe(before);
      expect(niceOf(b.pid)).toBe(before); // the other session keeps its priority
    } finally {
      await a.c.end();
      await b.c.end();
    }
  });
});
