// The worker pools lower their threads' CPU priority (server/src/jobs/threads/pool.ts, piscina's niceIncrement) so the API
// thread gets a core first. Checked against the kernel's own record (/proc/self/task/<tid>/stat, proc(5)): after pool
// tasks ran, this process has threads at the lowered nice value, and the calling thread keeps its own. Linux only.
import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { afterAll, describe, expect, it } from 'vitest';
import { resolveSettings } from '../../../server/src/stats/fullSet';
import { validate } from '../../../server/src/stats/index';
import { WORKER_NICE } from '../../../server/src/jobs/threads/sessionPriority';
import { bootstrapInWorkers, precisionInPool, stopPools } from '../../../server/src/jobs/threads/pool';
import { threadNice } from '../../helpers/threadNice';

const linux = process.platform === 'linux' && existsSync('/proc/self/task');

/** Nice value of every thread of this process (field 19 of each task's stat). */
function threadNices(): Map<string, number> {
  const out = new Map<string, number>();
  for (const tid of readdirSync('/proc/self/task')) {
    try {
      const stat = readFileSync(`/proc/self/task/${tid}/stat`, 'utf8');
      out.set(tid, Number(stat.slice(stat.lastIndexOf(')') + 2).split(' ')[16]));
    } catch {
      // the thread ended while the folder was read
    }
  }
  return out;
}

afterAll(() => stopPools());

describe.skipIf(!linux)('worker pool thread priority (Linux per-thread nice value)', () => {
  it('runs background and request tasks in threads at the lowered priority, never the calling thread', async () => {
    const mine = threadNice();
    const expected = Math.min(19, mine + WORKER_NICE);
    const before = threadNices();
    // A request task (adequacy widths) and a background task (bootstrap ranges), on invented data.
    const widths = await precisionInPool(2000, 300, 0.75);
    expect(widths.auc).toBeGreaterThan(0);
    const n = 400;
    const p = Float64Array.from({ length: n }, (_, i) => 0.05 + (0.9 * i) / n);
    const y = Uint8Array.from({ length: n }, (_, i) => (i % 7 === 0 || i > 300 ? 1 : 0));
    const settings = resolveSettings({ bootstrapReplicates: 4, bootstrapSeed: 11 });
    const boot = await bootstrapInWorkers(p, y, settings, validate(p, y, settings), 2);
    expect(boot.replicates).toBe(4);
    const started = [...threadNices()].filter(([tid]) => !before.has(tid));
    const lowered = started.filter(([, nice]) => nice === expected);
    if (expected > mine) {
      // One thread of the requests pool and at least one of the background pool (the pools keep idle threads a while).
      expect(lowered.length, `new threads and their nice values: ${JSON.stringify(started)}`).toBeGreaterThanOrEqual(2);
    }
    expect(threadNice()).toBe(mine);
  });
});
