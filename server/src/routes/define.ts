import querystring from 'node:querystring';
import type { IncomingMessage, ServerResponse } from 'node:http';
import type { Request, RequestHandler, Router } from 'express';
import type { ZodType } from 'zod';
import type { Role } from '@shared/roles';
import { authenticate, authenticateRequest, requireRole } from '../middleware/auth';
import { HttpError, zodMessage } from '../middleware/errors';
import { findBadText } from '../middleware/textGuard';
import type { ResponseCache } from '../services/responseCache';

export type Method = 'get' | 'post' | 'put' | 'patch' | 'delete';
/** 'public': no token; 'signed-in': any active account; otherwise the roles allowed. */
export type Access = 'public' | 'signed-in' | readonly Role[];

export interface RouteDef {
  method: Method;
  path: string;
  access: Access;
  summary: string;
  body?: ZodType;
  query?: ZodType;
  params?: ZodType;
  /** Middleware that must run before validation (e.g. a multipart upload parser). */
  before?: RequestHandler[];
  handler: RequestHandler;
  /** GET only: the handler keeps its answers here, and keptAnswers() may send a kept one without the Express chain. */
  cachedRead?: CachedRead;
}

function validate(route: RouteDef): RequestHandler {
  return (req, _res, next) => {
    for (const part of ['params', 'query', 'body'] as const) {
      const schema = route[part];
      if (!schema) continue;
      const parsed = schema.safeParse(part === 'body' ? (req.body ?? {}) : req[part]);
      if (!parsed.success) throw new HttpError(400, `invalid ${part}: ${zodMessage(parsed.error)}`);
      // Express 5 makes req.query a getter; keep the parsed copy where handlers read it.
      if (part === 'query') Object.defineProperty(req, 'query', { value: parsed.data, writable: true });
      else req[part] = parsed.data;
    }
    next();
  };
}

export function mountRoutes(router: Router, routes: readonly RouteDef[]): void {
  for (const route of routes) {
    const chain: RequestHandler[] = [];
    if (route.access !== 'public') chain.push(authenticate);
    if (Array.isArray(route.access)) chain.push(requireRole(route.access));
    chain.push(...(route.before ?? []), validate(route), route.handler);
    router[route.method](route.path, ...chain);
  }
}

// ---------------------------------------------------------------- kept answers, sent without the Express chain

/** A GET route whose answers are kept in a ResponseCache under `key` (computed from the validated params and query). */
export interface CachedRead {
  cache: ResponseCache;
  key: (params: Record<string, unknown>, query: Record<string, unknown>) => string;
}

type HeaderList = [name: string, value: string | number | readonly string[]][];

/** The headers a middleware such as helmet sets on every answer, recorded once by running it on a stand-in. */
export function recordHeaders(middleware: RequestHandler): HeaderList {
  const headers = new Map<string, HeaderList[number]>();
  const res = {
    setHeader: (name: string, value: string | number | readonly string[]) => headers.set(name.toLowerCase(), [name, value]),
    removeHeader: (name: string) => headers.delete(name.toLowerCase()),
    getHeader: (name: string) => headers.get(name.toLowerCase())?.[1],
  };
  let called = false;
  middleware({ headers: {}, method: 'GET', url: '/' } as never, res as never, () => (called = true));
  if (!called) throw new Error('the header middleware did not finish synchronously');
  return [...headers.values()];
}

const segmentsOf = (path: string) => path.split('/').slice(1);

/**
 * Answers a GET of a CachedRead route from its kept answer before Express runs at all — the same route (first table
 * match), the same sign-in and role check, the same validation and the same headers (`headers`, recorded from the
 * security middleware) — and leaves everything else to Express unchanged: a miss, any refusal, HEAD, conditional
 * requests, a request with a body, and any path not in plain form (trailing slash, percent-escapes, odd characters),
 * so that every answer this sends is one the full chain would have sent. Returns false (synchronously) or a promise
 * of false when Express should answer, true when the kept answer went out.
 */
export function keptAnswers(routes: readonly RouteDef[], headers: HeaderList): (req: IncomingMessage, res: ServerResponse) => false | Promise<boolean> {
  const gets = routes.filter((r) => r.method === 'get').map((r) => ({ route: r, segments: segmentsOf(r.path.toLowerCase()) }));
  if (!gets.some((g) => g.route.cachedRead)) return () => false;
  // Literal segments compared without case, as the router does; parameters keep the case they came with.
  const match = (lower: string[], segments: string[], pattern: string[]): Record<string, string> | null => {
    if (segments.length !== pattern.length) return null;
    let params: Record<string, string> | null = null;
    for (let i = 0; i < pattern.length; i++) {
      if (pattern[i].startsWith(':')) {
        if (!segments[i]) return null;
        (params ??= {})[pattern[i].slice(1)] = segments[i];
      } else if (pattern[i] !== lower[i]) return null;
    }
    return params ?? {};
  };
  const plain = /^\/api(\/[A-Za-z0-9_.-]+)+$/;
  const flat = headers.flatMap(([name, value]) => (Array.isArray(value) ? value.flatMap((v: string) => [name, v]) : [name, String(value)]));
  return (req, res) => {
    const url = req.url ?? '';
    if (req.method !== 'GET' || !url.startsWith('/api/')) return false;
    const h = req.headers;
    if (h['if-none-match'] || h['if-modified-since'] || h['content-length'] || h['transfer-encoding']) return false;
    const q = url.indexOf('?');
    const path = q < 0 ? url : url.slice(0, q);
    if (!plain.test(path)) return false;
    const segments = segmentsOf(path);
    const lower = segmentsOf(path.toLowerCase());
    let found: { route: RouteDef; params: Record<string, string> } | null = null;
    for (const g of gets) {
      const params = match(lower, segments, g.segments);
      if (params) {
        found = { route: g.route, params };
        break;
      }
    }
    const cached = found?.route.cachedRead;
    if (!found || !cached) return false;
    const { route } = found;
    return (async () => {
      try {
        // Express 5's default ("simple") query parser is node's querystring.parse.
        const rawQuery = q < 0 ? {} : { ...querystring.parse(url.slice(q + 1)) };
        if (findBadText(rawQuery)) return false;
        if (route.access !== 'public') {
          const user = await authenticateRequest(req as Request);
          if (Array.isArray(route.access) && !route.access.includes(user.role)) return false;
        }
        const params = route.params ? route.params.safeParse(found.params) : { success: true as const, data: found.params };
        const query = route.query ? route.query.safeParse(rawQuery) : { success: true as const, data: rawQuery };
        if (!params.success || !query.success) return false;
        const kept = cached.cache.peek(cached.key(params.data as Record<string, unknown>, query.data as Record<string, unknown>));
        if (!kept) return false;
        // One writeHead with a flat list: per-header setHeader calls measured as a large share of this path.
        res.writeHead(200, [...flat, 'Content-Type', 'application/json; charset=utf-8', 'ETag', kept.etag, 'Content-Length', String(kept.body.length)]);
        res.end(kept.body);
        return true;
      } catch {
        // A refusal (e.g. a bad token) is answered by the full chain, in its usual words.
        return false;
      }
    })();
  };
}
