// Shared helpers for API tests: one app, a real PostgreSQL, and demo-account tokens.
import 'reflect-metadata';
import request from 'supertest';
import { afterAll, beforeAll, expect } from 'vitest';
import type { Role } from '@shared/roles';
import type { RunDetail } from '@shared/runs';
import type { CompletedScoreComparison } from '@shared/scoreComparison';
import { createApp } from '../../server/src/http/app';
import { processNextRun } from '../../server/src/domain/runs/runQueue';
import { processNextComparison } from '../../server/src/domain/comparisons/comparisonQueue';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import type { DataSource } from 'typeorm';
import {
  closeDatabase,
  createOwnerDataSource,
  dataSource,
  initDatabase,
} from '../../server/src/platform/database/dataSource';

export const app = createApp({ serveClient: false });
export { dataSource, DEMO_PASSWORD };

export const demoEmail = (role: Role) => `${role}@demo.test`;

/** Opens the database for this test file and closes it afterwards. */
export function useDatabase(): void {
  beforeAll(async () => {
    await initDatabase(false);
  });
  afterAll(async () => {
    await closeDatabase();
    const o = owner;
    owner = undefined;
    if (o?.isInitialized) await o.destroy();
  });
}

let owner: DataSource | undefined;

/**
 * A connection as the owner role, for fixtures and attacks that need rights the API never has (tests run as the
 * runtime role, like the server). Opened on first use, closed with the file's database (useDatabase).
 */
export async function ownerDataSource(): Promise<DataSource> {
  if (!owner) owner = createOwnerDataSource();
  if (!owner.isInitialized) await owner.initialize();
  return owner;
}

/** One statement as the owner role (ownerDataSource). */
export const ownerQuery = async (sql: string, params?: unknown[]) => (await ownerDataSource()).query(sql, params);

/** The runtime role has no grant for this statement; the owner, who has one, still hits the table's trigger. */
export async function refusedTwice(sql: string, params: unknown[], trigger: RegExp): Promise<void> {
  await expect(dataSource.query(sql, params)).rejects.toThrow(/permission denied/);
  await expect(ownerQuery(sql, params)).rejects.toThrow(trigger);
}

const tokens = new Map<string, string>();

export async function loginAs(email: string, password = DEMO_PASSWORD): Promise<string> {
  const res = await request(app).post('/api/auth/login').send({ email, password });
  if (res.status !== 200) throw new Error(`login as ${email} failed: ${res.status} ${JSON.stringify(res.body)}`);
  return res.body.token as string;
}

/** A cached token for a demo role (sign-in costs a bcrypt comparison). */
export async function tokenFor(role: Role): Promise<string> {
  if (!tokens.has(role)) tokens.set(role, await loginAs(demoEmail(role)));
  return tokens.get(role)!;
}

export const bearer = (token: string) => ({ Authorization: `Bearer ${token}` });

export async function countRows(table: string): Promise<number> {
  const rows: { n: string }[] = await dataSource.query(`SELECT count(*)::text AS n FROM ${table}`);
  return Number(rows[0].n);
}

export const uniqueEmail = (prefix: string) =>
  `${prefix}-${Date.now()}-${Math.floor(Math.random() * 1e6)}@example.test`;

/** A run started as the statistician, computed here (API tests start no job workers), read back completed. */
export async function completedRun(
  scoreVersionId: string,
  cohortVersionId: string,
  settings: Record<string, unknown> = {},
): Promise<RunDetail> {
  const res = await request(app)
    .post('/api/runs')
    .set(bearer(await tokenFor('statistician')))
    .send({ scoreVersionId, cohortVersionId, settings });
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  while (await processNextRun());
  const got = await request(app)
    .get(`/api/runs/${res.body.run.id}`)
    .set(bearer(await tokenFor('statistician')));
  expect(got.status).toBe(200);
  return got.body.run as RunDetail;
}

/** A score comparison asked for as the statistician (202), its job run here, read back completed. */
export async function completedComparison(body: Record<string, unknown>): Promise<CompletedScoreComparison> {
  const res = await request(app)
    .post('/api/comparisons')
    .set(bearer(await tokenFor('statistician')))
    .send(body);
  expect(res.status, JSON.stringify(res.body)).toBe(202);
  while (await processNextComparison());
  const got = await request(app)
    .get(`/api/comparisons/${res.body.comparison.id}`)
    .set(bearer(await tokenFor('statistician')));
  expect(got.status).toBe(200);
  expect(got.body.comparison.status, got.body.comparison.error).toBe('completed');
  return got.body.comparison as CompletedScoreComparison;
}
