// Loaded into the benchmarked server process (node --import ./tests/bench/eventLoopProbe.mjs): measures event-loop delay
// with perf_hooks.monitorEventLoopDelay, and how busy the loop was (performance.eventLoopUtilization), and answers the
// parent over IPC. Plain JS so worker threads that inherit the flag load it without a TypeScript hook; it does nothing
// outside the main thread. Benchmark-only.
import { monitorEventLoopDelay, performance } from 'node:perf_hooks';
import { isMainThread } from 'node:worker_threads';

if (isMainThread && typeof process.send === 'function') {
  const h = monitorEventLoopDelay({ resolution: 10 });
  h.enable();
  const ms = (ns) => Math.round((ns / 1e6) * 10) / 10;
  let elu = performance.eventLoopUtilization();
  process.on('message', (msg) => {
    if (msg === 'event-loop:reset') {
      h.reset();
      elu = performance.eventLoopUtilization();
      process.send({ kind: 'event-loop', reset: true });
    } else if (msg === 'event-loop:read') {
      const busy = performance.eventLoopUtilization(elu).utilization;
      process.send({
        kind: 'event-loop',
        mean: ms(h.mean),
        p50: ms(h.percentile(50)),
        p99: ms(h.percentile(99)),
        max: ms(h.max),
        busy: Math.round(busy * 100),
      });
    }
  });
}
