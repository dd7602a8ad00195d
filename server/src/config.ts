// Every setting comes from the environment with a documented default (README, "Configuration").
const num = (v: string | undefined, d: number) => (v === undefined || v === '' ? d : Number(v));

export const config = {
  port: num(process.env.PORT, 3000),
  db: {
    host: process.env.PGHOST ?? '127.0.0.1',
    port: num(process.env.PGPORT ?? process.env.PLUMBLINE_PGPORT, 54329),
    user: process.env.PGUSER ?? 'postgres',
    password: process.env.PGPASSWORD ?? '',
    database: process.env.PGDATABASE ?? 'plumbline',
  },
  // Dev/demo secret only; production sets PLUMBLINE_JWT_SECRET.
  jwtSecret: process.env.PLUMBLINE_JWT_SECRET ?? 'plumbline-dev-secret-change-me',
  tokenLifetimeSeconds: num(process.env.PLUMBLINE_TOKEN_SECONDS, 30 * 60),
  loginRateLimit: {
    windowMs: num(process.env.PLUMBLINE_LOGIN_WINDOW_MS, 15 * 60 * 1000),
    maxPerIp: num(process.env.PLUMBLINE_LOGIN_MAX_PER_IP, 20),
    maxFailuresPerAccount: num(process.env.PLUMBLINE_LOGIN_MAX_FAILURES, 5),
  },
  // Express 'trust proxy' value naming the reverse proxy (e.g. 'loopback', '10.0.0.5', 1); empty: X-Forwarded-For is ignored.
  trustProxy: process.env.PLUMBLINE_TRUST_PROXY ?? '',
  uploadLimitBytes: num(process.env.PLUMBLINE_UPLOAD_LIMIT_MB, 64) * 1024 * 1024,
  smtp: {
    host: process.env.SMTP_HOST ?? '127.0.0.1',
    port: num(process.env.SMTP_PORT, 2525),
    user: process.env.SMTP_USER ?? '',
    password: process.env.SMTP_PASSWORD ?? '',
    secure: process.env.SMTP_SECURE === 'true',
    from: process.env.SMTP_FROM ?? 'Plumbline <plumbline@demo.test>',
  },
  devOutbox: process.env.PLUMBLINE_DEV_OUTBOX !== 'false' && process.env.NODE_ENV !== 'production',
  clientDir: process.env.PLUMBLINE_CLIENT_DIR ?? 'dist/client',
  bcryptCost: num(process.env.PLUMBLINE_BCRYPT_COST, 10),
};

export const DEMO_PASSWORD = 'plumbline-demo-2026';
