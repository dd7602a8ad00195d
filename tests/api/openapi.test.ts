// GET /api/openapi.json: the API described by its own route table and zod schemas.
// Checked against the OpenAPI 3.1 JSON Schema (@seriousme/openapi-schema-validator, which bundles the schemas the
// OpenAPI Initiative publishes) and, route by route, against the hand-checked access matrix.
import { Validator } from '@seriousme/openapi-schema-validator';
import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { ROLES } from '@shared/roles';
import { app, useDatabase } from '../helpers/api';
import { accessMatrix } from '../helpers/accessMatrix';

useDatabase();

type Operation = {
  summary: string;
  parameters: { name: string; in: string; required: boolean }[];
  requestBody?: { content: Record<string, unknown> };
  responses: Record<string, { description: string }>;
  'x-plumbline-roles': string[];
  'x-plumbline-access': string;
  security?: unknown[];
};
type Document = { openapi: string; paths: Record<string, Record<string, Operation>> };

async function fetchDocument(): Promise<Document> {
  const res = await request(app).get('/api/openapi.json');
  expect(res.status).toBe(200);
  expect(res.headers['content-type']).toMatch(/application\/json/);
  return res.body as Document;
}

describe('the OpenAPI document', () => {
  it('is valid OpenAPI 3.1', async () => {
    const document = await fetchDocument();
    const validator = new Validator();
    const result = await validator.validate(document as unknown as Record<string, unknown>);
    expect(result.errors ?? [], 'schema errors').toEqual([]);
    expect(result.valid).toBe(true);
    expect(validator.version).toBe('3.1');
  });

  it('has every route of the access matrix, with its roles, and nothing else', async () => {
    const document = await fetchDocument();
    const described = Object.entries(document.paths).flatMap(([path, ops]) =>
      Object.entries(ops).map(([method, op]) => ({
        key: `${method.toUpperCase()} ${path.replace(/\{(\w+)\}/g, ':$1')}`,
        op,
      })),
    );
    expect(described.map((d) => d.key).sort()).toEqual(Object.keys(accessMatrix).sort());
    for (const { key, op } of described) {
      const access = accessMatrix[key];
      const roles = access === 'public' ? [] : access === 'signed-in' ? [...ROLES] : [...access];
      expect([...op['x-plumbline-roles']].sort(), key).toEqual(roles.sort());
      expect(op['x-plumbline-access'], key).toBe(access === 'public' || access === 'signed-in' ? access : 'roles');
      // Public routes say so; the others fall back to the document-wide bearer requirement.
      expect(op.security, key).toEqual(access === 'public' ? [] : undefined);
      expect(op.summary.length, `${key} has a summary`).toBeGreaterThan(3);
    }
  });

  it('declares each path template parameter, and the inputs the server validates', async () => {
    const { paths } = await fetchDocument();
    for (const [path, ops] of Object.entries(paths)) {
      const templated = [...path.matchAll(/\{(\w+)\}/g)].map((m) => m[1]).sort();
      for (const [method, op] of Object.entries(ops)) {
        const inPath = op.parameters.filter((p) => p.in === 'path');
        expect(inPath.map((p) => p.name).sort(), `${method} ${path}`).toEqual(templated);
        expect(inPath.every((p) => p.required)).toBe(true);
      }
    }
    // Spot checks against the schemas in shared/src (what the server refuses with 400 when absent or wrong).
    const login = paths['/api/auth/login'].post.requestBody?.content['application/json'] as {
      schema: { required: string[] };
    };
    expect(login.schema.required.sort()).toEqual(['email', 'password']);
    const rows = paths['/api/cohorts/{id}/versions/{version}/rows'].get.parameters.map((p) => `${p.in}:${p.name}`);
    expect(rows).toEqual(
      expect.arrayContaining(['path:id', 'path:version', 'query:search', 'query:sortBy', 'query:sortDir']),
    );
    expect(Object.keys(paths['/api/cohorts'].post.requestBody?.content ?? {})).toEqual(['multipart/form-data']);
    // A comparison is accepted and computed by a job: 202, not 200; its page can be waited on.
    expect(Object.keys(paths['/api/comparisons'].post.responses)).toContain('202');
    expect(Object.keys(paths['/api/comparisons'].post.responses)).not.toContain('200');
    expect(paths['/api/comparisons/{id}'].get.parameters.map((p) => `${p.in}:${p.name}`)).toContain(
      'query:waitSeconds',
    );
  });

  it('is readable without signing in (it describes no data)', async () => {
    const res = await request(app).get('/api/openapi.json').set('Authorization', 'Bearer not-a-token');
    // A public route ignores a bad token rather than refusing the description.
    expect(res.status).toBe(200);
  });
});
