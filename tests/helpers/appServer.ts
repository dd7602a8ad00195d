// Starts the real server (tsx, as in production start-up) serving the built client, for browser tests.
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

const root = fileURLToPath(new URL('../..', import.meta.url));
const tsxCli = path.join(root, 'node_modules/tsx/dist/cli.mjs');

export const appPort = Number(process.env.PORT ?? '3100');
export const appUrl = `http://127.0.0.1:${appPort}`;

let child: ChildProcess | undefined;
let output = '';

async function healthy(): Promise<boolean> {
  try {
    const res = await fetch(`${appUrl}/api/health`);
    return res.status === 200;
  } catch {
    return false;
  }
}

/** Spawns `tsx server/src/index.ts` with the test's PostgreSQL settings and waits for /api/health. */
export async function startAppServer(timeoutMs = 60_000): Promise<string> {
  if (child) return appUrl;
  if (!existsSync(path.join(root, 'dist/client/index.html'))) {
    throw new Error('dist/client is missing: run `npx vite build` before the browser tests');
  }
  if (await healthy()) throw new Error(`port ${appPort} already answers /api/health; set PORT to a free port`);
  output = '';
  // Its own process group, so stopping it also stops anything tsx started.
  child = spawn(process.execPath, [tsxCli, 'server/src/index.ts'], {
    cwd: root,
    env: { ...process.env, PORT: String(appPort), PLUMBLINE_CLIENT_DIR: 'dist/client', NODE_ENV: 'test' },
    stdio: ['ignore', 'pipe', 'pipe'],
    detached: true,
  });
  child.stdout?.on('data', (d) => (output += d));
  child.stderr?.on('data', (d) => (output += d));
  const started = child;
  const exited = new Promise<number | null>((resolve) => started.once('exit', (code) => resolve(code)));

  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    if (started.exitCode !== null) break;
    if (await healthy()) return appUrl;
    await Promise.race([new Promise((r) => setTimeout(r, 250)), exited]);
  }
  await stopAppServer();
  throw new Error(`the app server did not become healthy on ${appUrl}:\n${output.slice(-4000)}`);
}

/** SIGTERM (the server closes its database pool), then SIGKILL if it lingers. */
export async function stopAppServer(graceMs = 10_000): Promise<void> {
  const running = child;
  child = undefined;
  if (!running?.pid || running.exitCode !== null) return;
  const exited = new Promise<void>((resolve) => running.once('exit', () => resolve()));
  const signalGroup = (signal: NodeJS.Signals) => {
    try {
      process.kill(-running.pid!, signal);
    } catch {
      // already gone
    }
  };
  signalGroup('SIGTERM');
  const timer = setTimeout(() => signalGroup('SIGKILL'), graceMs);
  await exited;
  clearTimeout(timer);
}

/** What the server printed so far (for failure messages). */
export const appServerOutput = () => output;
