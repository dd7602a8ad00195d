// npm run bench:load — the read workload alone, then the same reads under concurrent uploads and runs; loopback only,
// bounded in time. Topology: two API processes (PLUMBLINE_JOBS=off) and one job worker (server/src/worker.ts), as
// README "Several processes" describes; the reads and the background work go round-robin to the two API processes.
//   Reads (autocannon, 50 connections, 30 s each phase): GET /api/runs/:id (run pages), GET /api/scorecards (score
//   cards), GET /api/cohorts (cohort lists), rotating per connection.
//   Phase 1 "reads only": nothing else runs. Phase 2 "mixed": meanwhile 5 uploads of 100,000-row cohorts (upload →
//   mapping → row checks → store) and 2 validation runs, each slot starting its next one as soon as one ends, so they
//   are under way for the whole phase. Both phases print requests/s, p50/p95/p99/max latency,
//   errors and the server's event-loop delay.
//   The processes are children on 127.0.0.1 with the demo seed in the PG* database; each API process's event-loop
//   delay is measured inside it (tests/bench/eventLoopProbe.mjs). Settings: BENCH_SECONDS (each phase), BENCH_READS_ONLY_SECONDS
//   (phase 1; 0 skips it), BENCH_CONNECTIONS, BENCH_UPLOADS, BENCH_UPLOAD_ROWS, BENCH_RUNS, BENCH_PORT,
//   BENCH_RATE (requests/s offered over both API processes; unset: as fast as the server answers).
//   Line before the last: `ratio <mixed p95 / reads-only p95>`; last line (the mixed phase): `p95_ms <number> errors <number>`.
//   Reading the figures: autocannon keeps every connection busy (a closed loop), so the load is "as fast as the
//   server answers" and mean latency ≈ connections ÷ throughput. Targets: 0 errors, mixed p95 ≤ 100 ms and ≤ 3 × the
//   reads-only p95 (background work does not starve the API).
import 'reflect-metadata';
import autocannon from 'autocannon';
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { once } from 'node:events';
import net from 'node:net';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';

const root = fileURLToPath(new URL('../..', import.meta.url));
const SECONDS = Number(process.env.BENCH_SECONDS ?? 30);
const CONNECTIONS = Number(process.env.BENCH_CONNECTIONS ?? 50);
const UPLOADS = Number(process.env.BENCH_UPLOADS ?? 5);
const UPLOAD_ROWS = Number(process.env.BENCH_UPLOAD_ROWS ?? 100_000);
const RUNS = Number(process.env.BENCH_RUNS ?? 2);
// A fixed offered rate measures latency at a given load rather than the closed loop's "as fast as it answers", where
// latency is ≈ connections ÷ throughput. Requests then leave at even intervals whatever the answers do (an open loop;
// autocannon's own rate limit sends each second's quota in a burst), each timed from when it was due to leave.
const RATE = Number(process.env.BENCH_RATE ?? 0);
const READS_ONLY_SECONDS = Number(process.env.BENCH_READS_ONLY_SECONDS ?? SECONDS);
const HARD_LIMIT_MS = (SECONDS + READS_ONLY_SECONDS + 600) * 1000;

async function freePort(after = 0): Promise<number> {
  if (process.env.BENCH_PORT) return Number(process.env.BENCH_PORT) + after;
  // 3900–3949: clear of 3800–3899, where the crash-safety and outage tests pick their child servers' ports.
  for (let p = 3900 + after; p < 3950; p++) {
    const busy = await new Promise<boolean>((resolve) => {
      const s = net.connect({ host: '127.0.0.1', port: p }, () => {
        s.destroy();
        resolve(true);
      });
      s.on('error', () => resolve(false));
    });
    if (!busy) return p;
  }
  throw new Error('no free port in 3900–3949');
}

function percentile(sorted: number[], q: number): number {
  if (!sorted.length) return NaN;
  return sorted[Math.min(sorted.length - 1, Math.max(0, Math.ceil(q * sorted.length) - 1))];
}

const log = (msg: string) => console.log(`[bench] ${msg}`);

async function main() {
  const watchdog = setTimeout(() => {
    console.error('[bench] hard time limit reached, stopping');
    process.exit(2);
  }, HARD_LIMIT_MS);
  watchdog.unref();

  log(`demo seed into ${process.env.PGDATABASE ?? 'plumbline'} (only into an empty database)`);
  const seed = spawnSync(process.execPath, ['--import', 'tsx', 'server/src/demo/seed.ts'], {
    cwd: root,
    stdio: 'inherit',
    env: process.env,
  });
  if (seed.status !== 0) throw new Error('seeding failed');

  // Two API processes (jobs off) with the event-loop probe, and one job worker.
  interface Proc {
    child: ChildProcess;
    out: string;
    base: string | null;
  }
  const procs: Proc[] = [];
  const startProc = (entry: string, port: number | null, env: Record<string, string>): Proc => {
    // NODE_ENV=test, not production: a production start refuses the demo accounts this benchmark signs in with.
    const args = ['--import', 'tsx', ...(port ? ['--import', './tests/bench/eventLoopProbe.mjs'] : []), entry];
    const child = spawn(process.execPath, args, {
      cwd: root,
      env: {
        ...process.env,
        ...env,
        ...(port ? { PORT: String(port) } : {}),
        NODE_ENV: 'test',
        PLUMBLINE_CLIENT_DIR: path.join(root, 'dist/client'),
        PLUMBLINE_LOGIN_MAX_PER_IP: '100000',
      },
      stdio: ['ignore', 'pipe', 'pipe', 'ipc'],
    });
    const proc: Proc = { child, out: '', base: port ? `http://127.0.0.1:${port}` : null };
    // Only the tail is kept (for a failed start): the servers log one JSON line per request.
    child.stdout?.on('data', (d) => (proc.out = (proc.out + d).slice(-20_000)));
    child.stderr?.on('data', (d) => (proc.out = (proc.out + d).slice(-20_000)));
    procs.push(proc);
    return proc;
  };
  const stopServer = async () => {
    await Promise.all(
      procs.map(async ({ child }) => {
        if (child.exitCode === null) {
          child.kill('SIGTERM');
          await Promise.race([once(child, 'exit'), new Promise((r) => setTimeout(r, 15_000))]);
          if (child.exitCode === null) child.kill('SIGKILL');
        }
      }),
    );
  };
  const waitHealthy = async (p: Proc) => {
    for (let i = 0; ; i++) {
      if (p.child.exitCode !== null || i > 600) throw new Error(`server did not start:\n${p.out.slice(-3000)}`);
      if (
        await fetch(`${p.base}/api/health`).then(
          (r) => r.ok,
          () => false,
        )
      )
        return;
      await new Promise((r) => setTimeout(r, 200));
    }
  };
  try {
    // One at a time: each start migrates (a no-op after the first) and sets the runtime role's grants.
    const apiA = startProc('server/src/index.ts', await freePort(), { PLUMBLINE_JOBS: 'off' });
    await waitHealthy(apiA);
    const apiB = startProc('server/src/index.ts', await freePort(1), { PLUMBLINE_JOBS: 'off' });
    await waitHealthy(apiB);
    const worker = startProc('server/src/worker.ts', null, { PLUMBLINE_LOG_LEVEL: 'info' });
    for (let i = 0; !worker.out.includes('job worker started'); i++) {
      if (worker.child.exitCode !== null || i > 600)
        throw new Error(`worker did not start:\n${worker.out.slice(-3000)}`);
      await new Promise((r) => setTimeout(r, 200));
    }
    const apis = [apiA, apiB];
    const bases = apis.map((p) => p.base!);
    const base = bases[0];
    let turn = 0;
    /** The next API process, round-robin (the benchmark stands in for the reverse proxy). */
    const next = () => bases[turn++ % bases.length];
    const loopStats = (p: Proc, msg: string) =>
      new Promise<Record<string, number>>((resolve) => {
        p.child.once('message', (m) => resolve(m as Record<string, number>));
        p.child.send(msg);
      });

    const login = async (role: string) => {
      const r = await fetch(`${base}/api/auth/login`, {
        method: 'POST',
        headers: { 'Content-Type': 'application/json' },
        body: JSON.stringify({ email: `${role}@demo.test`, password: DEMO_PASSWORD }),
      });
      if (!r.ok) throw new Error(`login ${role}: ${r.status}`);
      return { Authorization: `Bearer ${((await r.json()) as { token: string }).token}` };
    };
    const admin = await login('admin');
    const steward = await login('steward');
    const statistician = await login('statistician');
    const getJson = async (p: string, h: Record<string, string>) => {
      const r = await fetch(`${next()}${p}`, { headers: h });
      return { status: r.status, body: (await r.json().catch(() => ({}))) as Record<string, unknown> };
    };

    // What the reads hit: a completed run, the score cards, the cohort list.
    const runs = await getJson('/api/runs?status=completed', admin);
    const runList = (runs.body.runs ?? runs.body.items ?? []) as { id: string }[];
    const reads: { method: 'GET'; path: string; headers: Record<string, string> }[] = [];
    if (runList[0]) reads.push({ method: 'GET', path: `/api/runs/${runList[0].id}`, headers: admin });
    if ((await getJson('/api/scorecards', admin)).status === 200)
      reads.push({ method: 'GET', path: '/api/scorecards', headers: admin });
    if ((await getJson('/api/cohorts', admin)).status === 200)
      reads.push({ method: 'GET', path: '/api/cohorts', headers: admin });
    if (!reads.length) throw new Error('none of the read routes answer; is the demo seeded?');
    log(`reads: ${reads.map((r) => r.path).join(', ')}`);

    // Background work: options for runs (score and cohort versions), and the upload file text.
    const options = await getJson('/api/runs/options', steward);
    // The demo's Kestrel formula (latest version) for uploads and runs; runs on the largest demo cohort versions.
    const svs =
      (options.body.scoreVersions as { id: string; mode: string; scoreName: string; version: number }[] | undefined) ??
      [];
    const sv = svs
      .filter((v) => v.mode === 'formula' && v.scoreName === 'Kestrel 30-day Readmission Score')
      .sort((a, b) => b.version - a.version)[0];
    const cv = (
      (options.body.cohortVersions as { id: string; rowCount: number; cohortName: string }[] | undefined) ?? []
    )
      .filter((v) => !v.cohortName.startsWith('Bench cohort'))
      .sort((a, b) => b.rowCount - a.rowCount);
    const csvText = `${[...kestrelQuarterCsv({ year: 2025, quarter: 4, index: 7, n: UPLOAD_ROWS, seed: 777 })].join('\n')}\n`;
    const stamp = Date.now();
    const background: string[] = [];

    const uploadOne = async (i: string) => {
      const t0 = Date.now();
      const form = new FormData();
      form.set('scoreVersionId', sv?.id ?? '');
      form.set('cohortName', `Bench cohort ${stamp}-${i} (invented data)`);
      form.set('file', new Blob([csvText], { type: 'text/csv' }), `bench-${i}.csv`);
      const created = await fetch(`${next()}/api/cohorts`, { method: 'POST', headers: steward, body: form });
      const cj = (await created.json()) as { upload?: { id: string }; error?: string };
      if (!cj.upload) return `upload ${i}: ${created.status} ${cj.error}`;
      const id = cj.upload.id;
      const mapped = await fetch(`${next()}/api/uploads/${id}/mapping`, {
        method: 'POST',
        headers: { ...steward, 'Content-Type': 'application/json' },
        body: JSON.stringify({ mapping: KESTREL_MAPPING }),
      });
      if (!mapped.ok) return `upload ${i}: mapping ${mapped.status}`;
      for (let t = 0; t < 1200; t++) {
        const u = (await getJson(`/api/uploads/${id}`, steward)).body.upload as { status: string } | undefined;
        if (u?.status !== 'processing') break;
        await new Promise((r) => setTimeout(r, 250));
      }
      const commit = await fetch(`${next()}/api/uploads/${id}/commit`, {
        method: 'POST',
        headers: { ...steward, 'Content-Type': 'application/json' },
        body: JSON.stringify({ excludeRejected: true }),
      });
      return `upload ${i}: ${UPLOAD_ROWS.toLocaleString('en')} rows stored=${commit.status} in ${Date.now() - t0} ms`;
    };
    const runOne = async (i: number) => {
      const t0 = Date.now();
      if (!sv || !cv.length) return `run ${i}: no score/cohort version to run`;
      const created = await fetch(`${next()}/api/runs`, {
        method: 'POST',
        headers: { ...statistician, 'Content-Type': 'application/json' },
        body: JSON.stringify({ scoreVersionId: sv.id, cohortVersionId: cv[i % cv.length].id }),
      });
      const body = (await created.json()) as { run?: { id: string }; id?: string; error?: string };
      const id = body.run?.id ?? body.id;
      if (!id) return `run ${i}: ${created.status} ${body.error}`;
      for (let t = 0; t < 2400; t++) {
        const r = (await getJson(`/api/runs/${id}`, statistician)).body as {
          run?: { status: string };
          status?: string;
        };
        const status = r.run?.status ?? r.status;
        if (status === 'completed' || status === 'failed') return `run ${i}: ${status} in ${Date.now() - t0} ms`;
        await new Promise((r2) => setTimeout(r2, 250));
      }
      return `run ${i}: still going`;
    };

    // One measured phase: autocannon over the reads against each API process at once (half the connections each),
    // every response time kept for the percentiles, each process's event-loop delay over the same interval.
    /** The percentiles of a phase's response times (ms, one decimal). */
    const spread = (latencies: number[]) => {
      latencies.sort((a, b) => a - b);
      const round = (x: number) => Math.round(x * 10) / 10;
      return {
        p50: round(percentile(latencies, 0.5)),
        p95: round(percentile(latencies, 0.95)),
        p99: round(percentile(latencies, 0.99)),
        max: round(latencies[latencies.length - 1] ?? NaN),
      };
    };
    /** The open loop: RATE requests a second at even intervals, round-robin over the reads and the API processes. */
    const paced = async (seconds: number, latencies: number[]) => {
      let requests = 0,
        timeouts = 0,
        non2xx = 0,
        connErrors = 0;
      const pending: Promise<void>[] = [];
      const start = performance.now();
      const total = Math.round(RATE * seconds);
      for (let k = 0; k < total; k++) {
        const due = start + (k * 1000) / RATE;
        const wait = due - performance.now();
        if (wait > 1) await new Promise((r) => setTimeout(r, wait));
        const read = reads[k % reads.length];
        pending.push(
          fetch(`${bases[k % bases.length]}${read.path}`, {
            headers: read.headers,
            signal: AbortSignal.timeout(10_000),
          })
            .then(async (r) => {
              await r.arrayBuffer();
              requests++;
              if (r.status < 200 || r.status > 299) non2xx++;
              latencies.push(performance.now() - due);
            })
            .catch((e: Error) => {
              if (e.name === 'TimeoutError') timeouts++;
              else connErrors++;
            }),
        );
      }
      await Promise.all(pending);
      return { requests, perSecond: Math.round(requests / seconds), connErrors, timeouts, non2xx };
    };
    const measureReads = async (seconds: number) => {
      await Promise.all(apis.map((p) => loopStats(p, 'event-loop:reset')));
      const latencies: number[] = [];
      if (RATE > 0) {
        const counts = await paced(seconds, latencies);
        const loops = await Promise.all(apis.map((p) => loopStats(p, 'event-loop:read')));
        return {
          seconds,
          ...counts,
          loops,
          ...spread(latencies),
          errors: counts.connErrors + counts.timeouts + counts.non2xx,
        };
      }
      const share = (i: number) => Math.floor(CONNECTIONS / bases.length) + (i < CONNECTIONS % bases.length ? 1 : 0);
      // The callback form returns the instance (an event emitter) so every response time can be kept for p95.
      const results = await Promise.all(
        bases.map(
          (url, i) =>
            new Promise<autocannon.Result>((resolve, reject) => {
              const instance = autocannon(
                {
                  url,
                  connections: share(i),
                  duration: seconds,
                  requests: reads,
                  timeout: 10,
                },
                (err, res) => (err ? reject(err) : resolve(res)),
              );
              instance.on('response', (_c: unknown, _status: number, _bytes: number, ms: number) => latencies.push(ms));
            }),
        ),
      );
      const loops = await Promise.all(apis.map((p) => loopStats(p, 'event-loop:read')));
      const sum = (f: (r: autocannon.Result) => number) => results.reduce((acc, r) => acc + f(r), 0);
      return {
        seconds,
        requests: sum((r) => r.requests.total),
        perSecond: Math.round(sum((r) => r.requests.average)),
        connErrors: sum((r) => r.errors),
        timeouts: sum((r) => r.timeouts),
        non2xx: sum((r) => r.non2xx),
        loops,
        ...spread(latencies),
        errors: sum((r) => r.errors + r.timeouts + r.non2xx),
      };
    };
    type Phase = Awaited<ReturnType<typeof measureReads>>;
    const printPhase = (title: string, ph: Phase) => {
      console.log(
        `${title} (${RATE > 0 ? `${RATE} req/s at even intervals` : `${CONNECTIONS} connections, as fast as answered`}, ${ph.seconds} s)`,
      );
      console.log(`  requests:         ${ph.requests} (${ph.perSecond} req/s average, both API processes)`);
      console.log(`  latency (ms):     p50 ${ph.p50}  p95 ${ph.p95}  p99 ${ph.p99}  max ${ph.max}`);
      console.log(
        `  errors:           ${ph.errors} (connection errors ${ph.connErrors}, timeouts ${ph.timeouts}, non-2xx ${ph.non2xx})`,
      );
      ph.loops.forEach((loop, i) =>
        console.log(
          `  event-loop delay: API ${'AB'[i]}: mean ${loop.mean} ms, p50 ${loop.p50} ms, p99 ${loop.p99} ms, max ${loop.max} ms; main thread busy ${loop.busy}% (during the reads)`,
        ),
      );
    };

    let readsOnly: Phase | null = null;
    if (READS_ONLY_SECONDS > 0) {
      log(`phase 1: reads only for ${READS_ONLY_SECONDS} s`);
      readsOnly = await measureReads(READS_ONLY_SECONDS);
    }

    log(`phase 2: reads for ${SECONDS} s with ${UPLOADS} uploads and ${RUNS} runs in progress throughout`);
    const started = Date.now();
    // Each upload slot and each run slot starts its next one as soon as the last has ended, until the reads stop: the
    // reads are measured with 5 uploads and 2 runs under way the whole time, not only in the phase's first seconds.
    let readsGoing = true;
    const slot = (name: string, one: (k: number) => Promise<string>) =>
      (async () => {
        for (let k = 0; readsGoing; k++) {
          try {
            background.push(await one(k));
          } catch (e) {
            background.push(`${name} ${k}: ${e}`);
          }
        }
      })();
    const work = [
      ...Array.from({ length: UPLOADS }, (_, i) => slot(`upload ${i}`, (k) => uploadOne(`${i}.${k}`))),
      ...Array.from({ length: RUNS }, (_, i) =>
        slot(`run ${i}`, (k) => runOne(i + RUNS * k).then((s) => s.replace(/^run \d+/, `run ${i}.${k}`))),
      ),
    ];
    const mixed = await measureReads(SECONDS);
    readsGoing = false;
    log(`reads done after ${Date.now() - started} ms; waiting for background work`);
    const backgroundDone = await Promise.race([
      Promise.all(work).then(() => true),
      new Promise<boolean>((r) => setTimeout(() => r(false), 300_000)),
    ]);

    const met = (ph: Phase) => (ph.errors === 0 && ph.p95 <= 100 ? 'met' : 'NOT met');
    const ratio = readsOnly && readsOnly.p95 > 0 ? Math.round((mixed.p95 / readsOnly.p95) * 1000) / 1000 : NaN;
    console.log('');
    console.log(
      `Plumbline load benchmark — loopback, two API processes (${bases.join(', ')}, PLUMBLINE_JOBS=off) and one job worker`,
    );
    console.log(`reads:            ${reads.map((r) => r.path.replace(/[0-9a-f-]{36}/, ':id')).join(', ')}`);
    if (readsOnly) printPhase('reads only', readsOnly);
    printPhase(
      `mixed: the same reads while ${UPLOADS} uploads of ${UPLOAD_ROWS.toLocaleString('en')} rows and ${RUNS} runs proceed`,
      mixed,
    );
    console.log(
      `  background:       ${background.sort().join('; ') || 'none'}${backgroundDone ? '' : ' (not all finished within 300 s after the reads)'}`,
    );
    console.log(
      `target (mixed):      0 errors and p95 ≤ 100 ms → ${met(mixed)}; mixed p95 ≤ 3 × reads-only p95 → ${ratio <= 3 ? 'met' : 'NOT met'}`,
    );
    console.log(`ratio ${ratio}`);
    console.log(`p95_ms ${mixed.p95} errors ${mixed.errors}`);
  } finally {
    await stopServer();
  }
}

main().then(
  () => process.exit(0),
  (err) => {
    console.error(`[bench] failed: ${(err as Error).message}`);
    process.exit(1);
  },
);
