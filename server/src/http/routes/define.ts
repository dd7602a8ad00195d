import type { RequestHandler, Router } from 'express';
import type { ZodType } from 'zod';
import type { Role } from '@shared/roles';
import { authenticate, requireRole } from '../middleware/auth';
import { HttpError, zodMessage } from '../middleware/errors';

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
  /** For a multipart upload: the form field that carries the file (described in /api/openapi.json). */
  multipartFile?: string;
  /** The success answer when it is not 200 (e.g. 202: accepted, computed by a job), for /api/openapi.json. */
  success?: { status: 201 | 202; description: string };
  /** Middleware that must run before validation (e.g. a multipart upload parser). */
  before?: RequestHandler[];
  handler: RequestHandler;
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
