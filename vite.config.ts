import { fileURLToPath } from 'node:url';
import { defineConfig } from 'vitest/config';
import vue from '@vitejs/plugin-vue';
import vuetify from 'vite-plugin-vuetify';

// Tests log at warn and above only (server/src/platform/observability/log.ts), so passing tests print no request lines; set
// here so the global set-up, the test workers and the child servers they start all inherit it.
process.env.PLUMBLINE_LOG_LEVEL ??= 'warn';

const here = (p: string) => fileURLToPath(new URL(p, import.meta.url));
const alias = { '@shared': here('./shared/src'), '@': here('./client/src') };

// Node-side suites share one real PostgreSQL, so database-backed files run one at a time.
const nodeProject = (name: string, include: string[], timeout: number, serial: boolean) => ({
  resolve: { alias },
  test: {
    name,
    include,
    environment: 'node',
    testTimeout: timeout,
    hookTimeout: timeout,
    fileParallelism: !serial,
    globalSetup: serial ? [here('./tests/helpers/globalSetup.ts')] : [],
    // No widths worked out for old runs at each start (services/adequacyWidths.ts): each test file starts the server.
    env: { PLUMBLINE_WARM_WIDTHS: '0' },
    // expect.poll waits for what a person waits for; on a busy machine that can take longer than vitest's 1 s default.
    expect: { poll: { timeout: 30_000 } },
  },
});

export default defineConfig({
  root: here('./client'),
  publicDir: false,
  resolve: { alias },
  plugins: [vue(), vuetify({ autoImport: true })],
  build: {
    outDir: here('./dist/client'),
    emptyOutDir: true,
    chunkSizeWarningLimit: 900,
  },
  server: {
    port: 5173,
    proxy: { '/api': `http://127.0.0.1:${process.env.PORT ?? 3000}` },
  },
  test: {
    root: here('.'),
    projects: [
      nodeProject('unit', ['tests/unit/**/*.test.ts', 'tests/reference/**/*.test.ts'], 120_000, false),
      nodeProject('api', ['tests/api/**/*.test.ts'], 120_000, true),
      nodeProject('browser', ['tests/browser/**/*.test.ts'], 240_000, true),
      {
        plugins: [vue(), vuetify({ autoImport: true })],
        resolve: { alias },
        test: {
          name: 'client',
          include: ['tests/client/**/*.test.ts'],
          environment: 'happy-dom',
          setupFiles: [here('./tests/client/setup.ts')],
          server: { deps: { inline: ['vuetify'] } },
        },
      },
    ],
  },
});
