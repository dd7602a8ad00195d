// The OpenAPI 3.1 description of the API, built from the route table and its zod schemas (zod's own JSON Schema
// output, which is the JSON Schema 2020-12 dialect OpenAPI 3.1 uses). Nothing here is written by hand per route.
import type { Request, Response } from 'express';
import { z, type ZodType } from 'zod';
import { ROLES } from '@shared/roles';
import type { Access, RouteDef } from './define';

type JsonSchema = Record<string, unknown>;

/** The JSON Schema of what a client may send (input side: defaults optional, coercions accept strings). */
function inputSchema(schema: ZodType): JsonSchema {
  const json = z.toJSONSchema(schema, { target: 'draft-2020-12', io: 'input', unrepresentable: 'any' }) as JsonSchema;
  delete json.$schema;
  return json;
}

/** Path and query schemas become one OpenAPI parameter per property. */
function parameters(schema: ZodType | undefined, where: 'path' | 'query') {
  if (!schema) return [];
  const json = inputSchema(schema);
  const properties = (json.properties ?? {}) as Record<string, JsonSchema>;
  const required = new Set((json.required ?? []) as string[]);
  return Object.entries(properties).map(([name, property]) => ({
    name,
    in: where,
    required: where === 'path' || required.has(name),
    ...(typeof property.description === 'string' ? { description: property.description } : {}),
    schema: property,
  }));
}

const who = (access: Access) =>
  access === 'public' ? 'anyone' : access === 'signed-in' ? 'any signed-in account' : access.join(', ');
const rolesOf = (access: Access): string[] =>
  access === 'public' ? [] : access === 'signed-in' ? [...ROLES] : [...access];

const errorResponse = (description: string) => ({
  description,
  content: { 'application/json': { schema: { $ref: '#/components/schemas/Error' } } },
});

function operation(route: RouteDef) {
  const responses: Record<string, unknown> = {
    [String(route.success?.status ?? 200)]: { description: route.success?.description ?? 'success' },
    '400': errorResponse('the input does not match the schema, or the request cannot be done'),
  };
  if (route.access !== 'public') responses['401'] = errorResponse('no valid sign-in token');
  if (Array.isArray(route.access)) responses['403'] = errorResponse('the account’s role may not do this');
  const body = route.multipartFile
    ? {
        required: true,
        content: {
          'multipart/form-data': {
            schema: {
              type: 'object',
              required: [route.multipartFile],
              properties: { [route.multipartFile]: { type: 'string', contentMediaType: 'text/csv' } },
            },
          },
        },
      }
    : route.body
      ? { required: true, content: { 'application/json': { schema: inputSchema(route.body) } } }
      : undefined;
  return {
    operationId: `${route.method}${route.path.replace(/[^A-Za-z0-9]+(.)?/g, (_m, c: string | undefined) => (c ?? '').toUpperCase())}`,
    summary: route.summary,
    description: `Who may call it: ${who(route.access)}.`,
    'x-plumbline-access': route.access === 'public' ? 'public' : route.access === 'signed-in' ? 'signed-in' : 'roles',
    'x-plumbline-roles': rolesOf(route.access),
    ...(route.access === 'public' ? { security: [] } : {}),
    parameters: [...parameters(route.params, 'path'), ...parameters(route.query, 'query')],
    ...(body ? { requestBody: body } : {}),
    responses,
  };
}

/** `/api/runs/:id` → `/api/runs/{id}` (OpenAPI path templating). */
export const openApiPath = (expressPath: string) => expressPath.replace(/:([A-Za-z_][A-Za-z0-9_]*)/g, '{$1}');

export function openApiDocument(routes: readonly RouteDef[], version: string) {
  const paths: Record<string, Record<string, unknown>> = {};
  for (const route of routes) (paths[openApiPath(route.path)] ??= {})[route.method] = operation(route);
  return {
    openapi: '3.1.0',
    info: {
      title: 'Plumbline API',
      version,
      description:
        'Every route of the Plumbline API, generated from the server’s route table and the zod schemas that validate each input. ' +
        'Sign in with POST /api/auth/login and send the token as `Authorization: Bearer <token>`. Errors are JSON `{ "error": "…" }`.',
    },
    servers: [{ url: '/' }],
    security: [{ bearer: [] }],
    components: {
      securitySchemes: { bearer: { type: 'http', scheme: 'bearer', bearerFormat: 'JWT' } },
      schemas: { Error: { type: 'object', required: ['error'], properties: { error: { type: 'string' } } } },
    },
    paths,
  };
}

/** GET /api/openapi.json — built once per process from the table (the table does not change while running). */
export function serveOpenApi(routes: () => readonly RouteDef[], version: string) {
  let document: ReturnType<typeof openApiDocument> | undefined;
  return (_req: Request, res: Response) => {
    document ??= openApiDocument(routes(), version);
    res.json(document);
  };
}
