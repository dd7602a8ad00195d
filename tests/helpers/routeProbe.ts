// Helpers for suites that walk every route in server/src/http/routes/table.ts (access control, injection, fuzz).
import { randomUUID } from 'node:crypto';
import type { Role } from '@shared/roles';
import { ROLES } from '@shared/roles';
import type { Access, RouteDef } from '../../server/src/http/routes/define';
import { routes } from '../../server/src/http/routes/table';

export { routes };
export type { RouteDef };

export const routeKey = (r: Pick<RouteDef, 'method' | 'path'>) => `${r.method.toUpperCase()} ${r.path}`;

/** Fills path parameters: random UUIDs, except numeric-looking names (version, n) that get a small integer. */
export function concretePath(path: string, fill: (name: string) => string = defaultFill): string {
  return path.replace(/:([A-Za-z_][A-Za-z0-9_]*)/g, (_m, name: string) => encodeURIComponent(fill(name)));
}

function defaultFill(name: string): string {
  return /^(version|n|number|seq)$/i.test(name) ? '1' : randomUUID();
}

/** Roles allowed by an access value; 'public' and 'signed-in' allow every role. */
export function allowedRoles(access: Access): Set<Role> {
  return new Set(typeof access === 'string' ? ROLES : access);
}

export const isPublic = (access: Access) => access === 'public';

/** The role to call a route with when a suite only needs one allowed caller (prefers the widest-reaching roles). */
export function callerFor(access: Access): Role | null {
  if (access === 'public') return null;
  const allowed = allowedRoles(access);
  for (const r of ['admin', 'statistician', 'steward', 'chair', 'clinician'] as const) if (allowed.has(r)) return r;
  return null;
}

/** Routes that take a JSON body (POST/PUT/PATCH); multipart uploads are recognised by a `before` parser and no body schema. */
export const jsonBodyRoutes = () => routes.filter((r) => ['post', 'put', 'patch'].includes(r.method));

/** Every route mounted on the Express app, walked from its router stack (to catch routes added outside the table). */
export function mountedRoutes(app: unknown): string[] {
  const out: string[] = [];
  const walk = (
    stack: { route?: { path: string; methods: Record<string, boolean> }; handle?: { stack?: unknown[] } }[],
  ) => {
    for (const layer of stack) {
      if (layer.route)
        for (const m of Object.keys(layer.route.methods)) out.push(`${m.toUpperCase()} ${layer.route.path}`);
      else if (layer.handle?.stack) walk(layer.handle.stack as never);
    }
  };
  walk((app as { router: { stack: never[] } }).router.stack);
  return out;
}

/** Every table name in the public schema with its row count (to prove hostile input changed nothing). */
export async function tableCounts(
  query: (sql: string) => Promise<{ relname: string }[]>,
  exclude: string[] = [],
): Promise<Record<string, number>> {
  const tables = (await query(
    `SELECT tablename AS relname FROM pg_tables WHERE schemaname = 'public' ORDER BY tablename`,
  )) as { relname: string }[];
  const counts: Record<string, number> = {};
  for (const t of tables) {
    if (exclude.includes(t.relname)) continue;
    const rows = (await query(`SELECT count(*)::text AS relname FROM "${t.relname.replace(/"/g, '""')}"`)) as {
      relname: string;
    }[];
    counts[t.relname] = Number(rows[0].relname);
  }
  return counts;
}

type ZodLike = { _zod?: { def: Record<string, unknown> } };

/** Unwraps optional/default/nullable/pipe/preprocess wrappers down to the schema that decides the type. */
export function unwrapSchema(schema: unknown): ZodLike | undefined {
  let s = schema as ZodLike | undefined;
  for (let i = 0; i < 20 && s?._zod; i++) {
    const def = s._zod.def;
    if (
      ['optional', 'nullable', 'default', 'prefault', 'catch', 'readonly', 'nonoptional'].includes(def.type as string)
    )
      s = def.innerType as ZodLike;
    else if (def.type === 'pipe')
      s = ((def.out as ZodLike)?._zod?.def.type === 'transform' ? def.in : def.out) as ZodLike;
    else if (def.type === 'lazy') s = (def.getter as () => ZodLike)();
    else break;
  }
  return s;
}

/** Field paths of an object schema, one level into nested objects (e.g. ['mapping', 'outcome'] → ['mapping.outcome.column', …]). */
export function fieldPaths(schema: unknown, depth = 2, prefix: string[] = []): string[][] {
  const s = unwrapSchema(schema);
  if (!s?._zod || s._zod.def.type !== 'object') return prefix.length ? [prefix] : [];
  const shape = s._zod.def.shape as Record<string, unknown>;
  const out: string[][] = [];
  for (const [k, v] of Object.entries(shape)) {
    const inner = unwrapSchema(v);
    if (depth > 1 && inner?._zod?.def.type === 'object')
      out.push([...prefix, k], ...fieldPaths(inner, depth - 1, [...prefix, k]));
    else out.push([...prefix, k]);
  }
  return out;
}

/** {a: {b: value}} from ['a', 'b']. */
export function setPath(path: string[], value: unknown): Record<string, unknown> {
  return path.reduceRight<unknown>((acc, key) => ({ [key]: acc }), value) as Record<string, unknown>;
}

/** Markers of an internal error leaking to the client: stack frames, driver errors, SQL text, file paths. */
export function leakMarkers(text: string): string[] {
  const found: string[] = [];
  const checks: [string, RegExp][] = [
    ['stack frame', /\n\s*at\s+\S+|\bat\s+[\w.<>]+\s+\(?[^\s)]*:\d+:\d+/],
    ['source path', /\/(server|node_modules|work)\/[\w./-]+\.(ts|js)/],
    ['QueryFailedError', /QueryFailedError|EntityNotFound|TypeORMError/],
    [
      'PostgreSQL error text',
      /syntax error at or near|invalid input syntax for|violates (foreign key|unique|check) constraint|relation "[^"]+" does not exist/i,
    ],
    ['SQL', /\b(SELECT\s+[\w*"]|INSERT\s+INTO\b|UPDATE\s+\w+\s+SET\b|DELETE\s+FROM\b)/i],
  ];
  for (const [name, re] of checks) if (re.test(text)) found.push(name);
  return found;
}
