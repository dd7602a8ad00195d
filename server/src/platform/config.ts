// Every setting Plumbline reads, checked once at start (README, "Configuration"). Nothing else reads process.env: a bad
// value stops the start with a message naming the variable instead of turning into NaN somewhere later.
import { z } from 'zod';

/** Set by the production build (esbuild `define`); undefined when the sources run under tsx or vitest. */
declare const __PLUMBLINE_COMPILED__: boolean | undefined;
export const compiled = typeof __PLUMBLINE_COMPILED__ !== 'undefined' && __PLUMBLINE_COMPILED__ === true;

/** The development signing secret: known to everyone who read the repository, so production refuses it. */
export const DEV_JWT_SECRET = 'plumbline-dev-secret-change-me';
export const DEMO_PASSWORD = 'plumbline-demo-2026';

// Empty means "not set" (a `VAR=` line in a service file), so the default applies.
const unset = (v: unknown) => (v === '' ? undefined : v);
const int = (d: number, min: number, max: number) =>
  z.preprocess(unset, z.coerce.number().int().min(min).max(max).default(d));
const num = (d: number, min: number) => z.preprocess(unset, z.coerce.number().min(min).default(d));
const text = (d: string) => z.preprocess(unset, z.string().default(d));
const optionalText = () => z.preprocess(unset, z.string().optional());
const flag = (d: boolean) =>
  z
    .preprocess(unset, z.enum(['true', 'false', '1', '0', 'on', 'off']).optional())
    .transform((v) => (v === undefined ? d : v === 'true' || v === '1' || v === 'on'));
const roleName = z
  .string()
  .regex(/^[a-z_][a-z0-9_]{0,62}$/, 'a PostgreSQL role name of lower-case letters, digits and _');

/** The environment, variable by variable. */
const envSchema = z.object({
  NODE_ENV: z.preprocess(unset, z.enum(['development', 'test', 'production']).optional()),
  PORT: int(3000, 1, 65535),
  PGHOST: text('127.0.0.1'),
  PGPORT: z.preprocess(unset, z.coerce.number().int().min(1).max(65535).optional()),
  PLUMBLINE_PGPORT: int(54329, 1, 65535),
  PGDATABASE: text('plumbline'),
  // The owner role: runs the migrations, owns the tables, creates the runtime role. PGUSER/PGPASSWORD as psql reads them.
  PGUSER: text('postgres'),
  PGPASSWORD: text(''),
  PLUMBLINE_DB_OWNER_USER: optionalText(),
  PLUMBLINE_DB_OWNER_PASSWORD: optionalText(),
  // The runtime role the API connects as (no superuser, owns nothing, only the grants in platform/database/runtimeRole.ts).
  PLUMBLINE_DB_APP_USER: z.preprocess(unset, roleName.default('plumbline_app')),
  PLUMBLINE_DB_APP_PASSWORD: text(''),
  PLUMBLINE_DB_MANAGE_ROLE: flag(true),
  PLUMBLINE_DB_POOL: int(10, 1, 500),
  PLUMBLINE_JWT_SECRET: optionalText(),
  PLUMBLINE_TOKEN_SECONDS: int(30 * 60, 30, 7 * 24 * 3600),
  PLUMBLINE_LOGIN_WINDOW_MS: int(15 * 60 * 1000, 1000, 24 * 3600 * 1000),
  PLUMBLINE_LOGIN_MAX_PER_IP: int(20, 1, 1_000_000),
  PLUMBLINE_LOGIN_MAX_FAILURES: int(5, 1, 1_000_000),
  // Express 'trust proxy' value naming the reverse proxy (e.g. 'loopback', '10.0.0.5', 1); empty: X-Forwarded-For is ignored.
  PLUMBLINE_TRUST_PROXY: text(''),
  PLUMBLINE_UPLOAD_LIMIT_MB: num(64, 0.001),
  PLUMBLINE_UPLOAD_DIR: optionalText(),
  PLUMBLINE_UPLOAD_THREADS: int(2, 1, 64),
  PLUMBLINE_UPLOAD_MAX_COLUMNS: int(500, 1, 100_000),
  PLUMBLINE_UPLOAD_KEEP_DAYS: num(14, 0),
  PLUMBLINE_WORKER_NICE: int(10, 0, 19),
  PLUMBLINE_WARM_WIDTHS: int(50, 0, 500),
  PLUMBLINE_MAIL_SENDER: flag(true),
  // off: an API-only process (it still enqueues jobs); `npm run worker` is the jobs-only process.
  PLUMBLINE_JOBS: flag(true),
  // How long a run or upload check may stay claimed before pg-boss gives it to another process (its one retry).
  PLUMBLINE_JOB_EXPIRE_SECONDS: int(3600, 5, 23 * 3600),
  PLUMBLINE_FAKE_SMTP: flag(false),
  PLUMBLINE_DEV_OUTBOX: flag(true),
  PLUMBLINE_PUBLIC_URL: z.preprocess(unset, z.url().optional()),
  PLUMBLINE_CLIENT_DIR: text('dist/client'),
  PLUMBLINE_BCRYPT_COST: int(10, 4, 15),
  // pino level (the test suite sets warn).
  PLUMBLINE_LOG_LEVEL: z.preprocess(
    unset,
    z.enum(['trace', 'debug', 'info', 'warn', 'error', 'fatal', 'silent']).default('info'),
  ),
  // When set, GET /api/metrics needs `Authorization: Bearer <this>` (a Prometheus scrape credential).
  PLUMBLINE_METRICS_TOKEN: text(''),
  // Read by the admin:create command only (server/src/cli/createAdmin.ts), never by the server.
  PLUMBLINE_ADMIN_PASSWORD: optionalText(),
  SMTP_HOST: text('127.0.0.1'),
  SMTP_PORT: int(2525, 1, 65535),
  SMTP_USER: text(''),
  SMTP_PASSWORD: text(''),
  SMTP_SECURE: flag(false),
  SMTP_FROM: text('Plumbline <plumbline@demo.test>'),
});

export class ConfigError extends Error {}

/**
 * How a production secret is judged: it must be the text form of at least 32 bytes as `openssl rand -hex 32` or
 * `openssl rand -base64 32` prints them (64+ hex digits, or base64/base64url decoding to 32+ bytes), and those bytes
 * must not be an obvious pattern (at least 16 distinct byte values: 32 random bytes have about 30). Randomness cannot be
 * proven from the value; this refuses words, short strings, repeated characters and the development value.
 */
export function jwtSecretProblem(secret: string | undefined): string | null {
  if (!secret) return 'is required in production (generate one with `openssl rand -base64 32`)';
  if (secret === DEV_JWT_SECRET)
    return 'is the development secret from the repository; generate a new one with `openssl rand -base64 32`';
  let bytes: Buffer | null = null;
  if (/^[0-9a-fA-F]+$/.test(secret) && secret.length % 2 === 0) bytes = Buffer.from(secret, 'hex');
  else if (/^[A-Za-z0-9+/_-]+={0,2}$/.test(secret))
    bytes = Buffer.from(secret.replace(/-/g, '+').replace(/_/g, '/'), 'base64');
  if (!bytes) return 'must be hex or base64 text of random bytes (e.g. `openssl rand -base64 32`)';
  if (bytes.length < 32) return `must encode at least 32 random bytes (it encodes ${bytes.length})`;
  if (new Set(bytes).size < 16)
    return 'does not look random (too few distinct bytes); generate one with `openssl rand -base64 32`';
  return null;
}

/** Reads and checks the environment; throws a ConfigError naming every bad variable. */
export function loadConfig(env: Record<string, string | undefined>) {
  const parsed = envSchema.safeParse(env);
  if (!parsed.success) {
    const lines = parsed.error.issues.map(
      (i) => `  ${i.path.join('.')}=${JSON.stringify(env[String(i.path[0])] ?? '')}: ${i.message}`,
    );
    throw new ConfigError(`Plumbline: invalid settings, not starting:\n${lines.join('\n')}`);
  }
  const e = parsed.data;
  const nodeEnv = e.NODE_ENV ?? (compiled ? 'production' : 'development');
  const production = nodeEnv === 'production';
  const problems: string[] = [];
  if (production) {
    const p = jwtSecretProblem(e.PLUMBLINE_JWT_SECRET);
    if (p) problems.push(`  PLUMBLINE_JWT_SECRET ${p}`);
  }
  const owner = {
    user: e.PLUMBLINE_DB_OWNER_USER ?? e.PGUSER,
    password: e.PLUMBLINE_DB_OWNER_PASSWORD ?? e.PGPASSWORD,
  };
  if (owner.user === e.PLUMBLINE_DB_APP_USER)
    problems.push(
      `  PLUMBLINE_DB_APP_USER must differ from the owner role (${owner.user}): the API must not own the tables`,
    );
  if (problems.length) throw new ConfigError(`Plumbline: invalid settings, not starting:\n${problems.join('\n')}`);
  const server = { host: e.PGHOST, port: e.PGPORT ?? e.PLUMBLINE_PGPORT, database: e.PGDATABASE };
  return {
    nodeEnv,
    production,
    port: e.PORT,
    /** The runtime connection: what the API, the workers and the tests use. */
    db: { ...server, user: e.PLUMBLINE_DB_APP_USER, password: e.PLUMBLINE_DB_APP_PASSWORD },
    /** The owner connection: migrations, the runtime role and its grants, owner-only test fixtures. */
    dbOwner: { ...server, ...owner },
    /** Create or update the runtime role (and its password, when set) at start. */
    manageRuntimeRole: e.PLUMBLINE_DB_MANAGE_ROLE,
    dbPoolSize: e.PLUMBLINE_DB_POOL,
    jwtSecret: e.PLUMBLINE_JWT_SECRET ?? DEV_JWT_SECRET,
    tokenLifetimeSeconds: e.PLUMBLINE_TOKEN_SECONDS,
    loginRateLimit: {
      windowMs: e.PLUMBLINE_LOGIN_WINDOW_MS,
      maxPerIp: e.PLUMBLINE_LOGIN_MAX_PER_IP,
      maxFailuresPerAccount: e.PLUMBLINE_LOGIN_MAX_FAILURES,
    },
    trustProxy: e.PLUMBLINE_TRUST_PROXY,
    uploadLimitBytes: e.PLUMBLINE_UPLOAD_LIMIT_MB * 1024 * 1024,
    uploadDir: e.PLUMBLINE_UPLOAD_DIR,
    uploadThreads: e.PLUMBLINE_UPLOAD_THREADS,
    uploadMaxColumns: e.PLUMBLINE_UPLOAD_MAX_COLUMNS,
    uploadKeepDays: e.PLUMBLINE_UPLOAD_KEEP_DAYS,
    workerNice: e.PLUMBLINE_WORKER_NICE,
    warmWidths: e.PLUMBLINE_WARM_WIDTHS,
    mailSender: e.PLUMBLINE_MAIL_SENDER,
    jobs: e.PLUMBLINE_JOBS,
    jobExpireSeconds: e.PLUMBLINE_JOB_EXPIRE_SECONDS,
    fakeSmtp: e.PLUMBLINE_FAKE_SMTP,
    publicUrl: (e.PLUMBLINE_PUBLIC_URL ?? `http://localhost:${e.PORT}`).replace(/\/$/, ''),
    smtp: {
      host: e.SMTP_HOST,
      port: e.SMTP_PORT,
      user: e.SMTP_USER,
      password: e.SMTP_PASSWORD,
      secure: e.SMTP_SECURE,
      from: e.SMTP_FROM,
    },
    devOutbox: e.PLUMBLINE_DEV_OUTBOX && !production,
    clientDir: e.PLUMBLINE_CLIENT_DIR,
    bcryptCost: e.PLUMBLINE_BCRYPT_COST,
    logLevel: e.PLUMBLINE_LOG_LEVEL,
    metricsToken: e.PLUMBLINE_METRICS_TOKEN,
    adminPassword: e.PLUMBLINE_ADMIN_PASSWORD,
  };
}

export type Config = ReturnType<typeof loadConfig>;

function loadOrStop(): Config {
  try {
    return loadConfig(process.env);
  } catch (err) {
    // A server or command line start stops here with the message alone; under vitest the error is thrown to the test.
    if (err instanceof ConfigError && !process.env.VITEST) {
      console.error(err.message);
      process.exit(78);
    }
    throw err;
  }
}

export const config = loadOrStop();
