// The run and bootstrap worker threads lower their own CPU priority (server/src/workers/threadPriority.ts) so the API
// thread gets the CPU first. Checked against the kernel's own record (/proc/thread-self/stat, proc(5)): the worker
// thread's nice value changes, the main thread's does not. Linux only (elsewhere the helper does nothing).
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import { describe, expect, it } from 'vitest';
import { lowerThisThreadPriority, WORKER_NICE } from '../../../server/src/workers/threadPriority';
import { threadNice } from '../../helpers/threadNice';

const linux = process.platform === 'linux' && existsSync('/proc/thread-self/stat');

function probeInWorker(): Promise<{ before: number; lowered: boolean; after: number }> {
  // The same boot file the server's threads start from (workers/tsWorker.ts), pointed at a probe script.
  const entry = new URL('../../../server/src/workers/runWorkerBoot.mjs', import.meta.url);
  const script = new URL('../../helpers/threadPriorityProbe.ts', import.meta.url).href;
  const tsconfig = fileURLToPath(new URL('../../../tsconfig.json', import.meta.url));
  return new Promise((resolve, reject) => {
    const w = new Worker(entry, { workerData: { workerFile: script, tsconfig } });
    w.once('message', (m) => {
      resolve(m);
      void w.terminate();
    });
    w.once('error', reject);
  });
}

describe.skipIf(!linux)('worker thread priority (Linux per-thread nice value)', () => {
  it('lowers the worker thread only, never the main thread', async () => {
    const mainBefore = threadNice();
    expect(lowerThisThreadPriority()).toBe(false); // refused on the main thread
    const probe = await probeInWorker();
    expect(probe.before).toBe(mainBefore); // a new thread starts with its creator's value
    if (mainBefore < WORKER_NICE) {
      expect(probe.lowered).toBe(true);
      expect(probe.after).toBe(WORKER_NICE);
    } else {
      // Already at least as low (the suite itself runs under nice): lowering further is not asked for.
      expect(probe.after).toBeGreaterThanOrEqual(mainBefore);
    }
    expect(threadNice()).toBe(mainBefore);
  });
});
