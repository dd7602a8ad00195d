// Drift API (so far: the sample-size planner) — roles and the Riley et al. (2021) numbers through HTTP.
import request from 'supertest';
import { describe, expect, it } from 'vitest';
import { app, bearer, tokenFor, useDatabase } from '../helpers/api';

useDatabase();

describe('GET /api/sample-size', () => {
  it('returns n per criterion and the largest for a statistician', async () => {
    const res = await request(app).get('/api/sample-size?eventRate=0.018&auc=0.8&ciWidthAuc=0.1&ciWidthOE=1').set(bearer(await tokenFor('statistician')));
    expect(res.status).toBe(200);
    const auc = res.body.criteria.find((c: { criterion: string }) => c.criterion === 'auc');
    expect(auc.n).toBe(4252); // REFERENCES.md [ref], Riley et al. 2021: φ = 0.018, C = 0.8, width 0.1
    expect(res.body.largest.criterion).toBe('auc');
  });

  it('refuses clinicians and anonymous callers, and bad input', async () => {
    expect((await request(app).get('/api/sample-size?eventRate=0.018&auc=0.8&ciWidthAuc=0.1').set(bearer(await tokenFor('clinician')))).status).toBe(403);
    expect((await request(app).get('/api/sample-size?eventRate=0.018&auc=0.8&ciWidthAuc=0.1')).status).toBe(401);
    expect((await request(app).get('/api/sample-size?eventRate=0.018&auc=0.8').set(bearer(await tokenFor('steward')))).status).toBe(400);
    expect((await request(app).get('/api/sample-size?eventRate=1.5&auc=0.8&ciWidthAuc=0.1').set(bearer(await tokenFor('chair')))).status).toBe(400);
  });
});
