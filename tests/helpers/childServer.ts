// The real server (tsx server/src/index.ts) as a child process, for tests that kill it or stop its database.
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

export const repoRoot = fileURLToPath(new URL('../..', import.meta.url));
const tsxCli = path.join(repoRoot, 'node_modules/tsx/dist/cli.mjs');

/** Runs a TypeScript file with tsx to completion (e.g. migrations + demo accounts against another database). */
export function runTsx(file: string, env: Record<string, string>, args: string[] = []): string {
  const res = spawnSync(process.execPath, [tsxCli, file, ...args], {
    cwd: repoRoot,
    env: { ...process.env, ...env },
    encoding: 'utf8',
    timeout: 300_000,
  });
  if (res.status !== 0) throw new Error(`tsx ${file} failed (${res.status}):\n${res.stderr}\n${res.stdout}`);
  return res.stdout;
}

export class ServerProcess {
  child?: ChildProcess;
  output = '';
  constructor(
    public port: number,
    private env: Record<string, string>,
    /** server/src/worker.ts starts a jobs-only process: ready when it logs that its workers started (no HTTP). */
    private entry = 'server/src/index.ts',
  ) {}

  get url() {
    return `http://127.0.0.1:${this.port}`;
  }

  async start(timeoutMs = 60_000): Promise<void> {
    this.output = '';
    // One process (tsx as an import hook, not the tsx CLI that runs the server in a grandchild), so SIGKILL hits the server itself.
    this.child = spawn(process.execPath, ['--import', 'tsx', this.entry], {
      cwd: repoRoot,
      env: {
        ...process.env,
        ...this.env,
        PORT: String(this.port),
        NODE_ENV: 'test',
        PLUMBLINE_CLIENT_DIR: '/nonexistent',
      },
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    this.child.stdout?.on('data', (d) => (this.output += d));
    this.child.stderr?.on('data', (d) => (this.output += d));
    const deadline = Date.now() + timeoutMs;
    while (Date.now() < deadline) {
      if (this.child.exitCode !== null) break;
      if (this.entry.endsWith('worker.ts')) {
        if (this.output.includes('job worker started')) return;
        await new Promise((r) => setTimeout(r, 200));
        continue;
      }
      const h = await this.health().catch(() => null);
      if (h?.status === 200) return;
      await new Promise((r) => setTimeout(r, 200));
    }
    throw new Error(`server did not become healthy on ${this.url}:\n${this.output.slice(-3000)}`);
  }

  get alive(): boolean {
    return !!this.child && this.child.exitCode === null && this.child.signalCode === null;
  }

  async health(): Promise<{ status: number; body: Record<string, unknown> }> {
    const res = await fetch(`${this.url}/api/health`, { signal: AbortSignal.timeout(5000) });
    return { status: res.status, body: (await res.json()) as Record<string, unknown> };
  }

  async fetchJson(
    p: string,
    init: RequestInit = {},
    timeoutMs = 15_000,
  ): Promise<{ status: number; body: Record<string, unknown> & { error?: string } }> {
    const send = () => fetch(`${this.url}${p}`, { ...init, signal: AbortSignal.timeout(timeoutMs) });
    // A kept-alive socket the server closed at its keep-alive timeout just as it was reused: the request never reached
    // the server (it closes only idle sockets), so it is sent once more on a new connection.
    const res = await send().catch((err: Error & { cause?: { code?: string } }) => {
      if (err.cause?.code === 'UND_ERR_SOCKET' && this.alive) return send();
      throw err;
    });
    const text = await res.text();
    let body: Record<string, unknown>;
    try {
      body = JSON.parse(text);
    } catch {
      body = { raw: text };
    }
    return { status: res.status, body };
  }

  async login(
    email: string,
    password: string,
  ): Promise<{ status: number; token?: string; body: Record<string, unknown> }> {
    const r = await this.fetchJson('/api/auth/login', {
      method: 'POST',
      headers: { 'Content-Type': 'application/json' },
      body: JSON.stringify({ email, password }),
    });
    return { status: r.status, token: r.body.token as string | undefined, body: r.body };
  }

  /** Signs in and returns the Authorization header for the next requests; throws with the answer when refused. */
  async bearer(email: string, password: string): Promise<{ Authorization: string }> {
    const r = await this.login(email, password);
    if (r.status !== 200) throw new Error(`login ${email}: ${r.status} ${JSON.stringify(r.body)}`);
    return { Authorization: `Bearer ${r.token}` };
  }

  /** Sends a signal and waits for the exit. */
  async kill(signal: NodeJS.Signals = 'SIGKILL'): Promise<void> {
    const c = this.child;
    if (!c || c.exitCode !== null || c.signalCode !== null) return;
    const exited = new Promise<void>((resolve) => c.once('exit', () => resolve()));
    c.kill(signal);
    const timer = setTimeout(() => c.kill('SIGKILL'), 10_000);
    await exited;
    clearTimeout(timer);
  }
}
