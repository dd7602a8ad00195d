// Compiles the server for `npm run start:prod`: one self-contained ES module per entry point in dist/server (the
// server, the jobs-only worker, the admin command and the worker threads' task module), so `node` runs it without tsx. esbuild resolves the `@shared/*`
// path alias from tsconfig.json while bundling; packages stay in node_modules. Like tsx, esbuild emits no decorator
// metadata: every entity column names its type (DEVELOPERS.md).
import { build } from 'esbuild';
import { rmSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const root = fileURLToPath(new URL('../..', import.meta.url));
const outdir = `${root}dist/server`;
rmSync(outdir, { recursive: true, force: true });
await build({
  absWorkingDir: root,
  entryPoints: {
    index: 'server/src/index.ts',
    worker: 'server/src/worker.ts',
    'create-admin': 'server/src/cli/createAdmin.ts',
    // Every pool's threads load this one module (server/src/jobs/threads/pool.ts).
    tasks: 'server/src/jobs/threads/tasks.ts',
  },
  outdir,
  bundle: true,
  // No shared chunks: each file's import.meta.url is dist/server itself, where workers/pool.ts looks for tasks.js.
  splitting: false,
  platform: 'node',
  format: 'esm',
  target: 'node20',
  packages: 'external',
  tsconfig: 'tsconfig.json',
  sourcemap: true,
  logLevel: 'warning',
  define: { __PLUMBLINE_COMPILED__: 'true' },
});
console.log(`server compiled into ${outdir}`);
