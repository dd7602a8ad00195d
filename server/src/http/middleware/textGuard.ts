// Refuses request text PostgreSQL cannot store or that is not well-formed Unicode: NUL characters (text and jsonb
// reject U+0000) and lone UTF-16 surrogates (e.g. "\ud800" in JSON). One check here instead of a 500 deep in a query.
import type { RequestHandler } from 'express';
import { HttpError } from './errors';

const MAX_DEPTH = 64;
// A high surrogate not followed by a low one, or a low one without a high one before it.
const LONE_SURROGATE = /[\ud800-\udbff](?![\udc00-\udfff])|(?<![\ud800-\udbff])[\udc00-\udfff]/;
const badString = (s: string) => s.includes('\u0000') || LONE_SURROGATE.test(s);

/** The path of the first bad string, or null. Also refuses absurd nesting (zod would walk it recursively). */
export function findBadText(value: unknown, path = '', depth = 0): string | null {
  if (depth > MAX_DEPTH) return `${path || 'body'} (nested deeper than ${MAX_DEPTH} levels)`;
  if (typeof value === 'string') return badString(value) ? path || 'value' : null;
  if (value === null || typeof value !== 'object') return null;
  if (Array.isArray(value)) {
    for (let i = 0; i < value.length; i++) {
      const bad = findBadText(value[i], `${path}[${i}]`, depth + 1);
      if (bad) return bad;
    }
    return null;
  }
  for (const [k, v] of Object.entries(value)) {
    const here = path ? `${path}.${k}` : k;
    if (badString(k)) return `${here} (key)`;
    const bad = findBadText(v, here, depth + 1);
    if (bad) return bad;
  }
  return null;
}

export const refuseBadText: RequestHandler = (req, _res, next) => {
  const inBody = findBadText(req.body);
  if (inBody)
    throw new HttpError(400, `invalid body: ${inBody} contains a NUL character, broken Unicode or too deep nesting`);
  const inQuery = findBadText(req.query);
  if (inQuery) throw new HttpError(400, `invalid query: ${inQuery} contains a NUL character or broken Unicode`);
  next();
};
