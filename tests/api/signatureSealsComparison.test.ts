// The chair's signature seals the score comparison the review relied on: the record hash covers the comparison's id
// and its results hash, so a review re-pointed at another comparison, or a comparison's results changed behind the
// triggers, shows as a signature whose link no longer verifies. Fixture data and the second score are invented.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Role } from '@shared/roles';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { stopBackgroundServices } from '../../server/src/jobs/background';
import { listSignatures } from '../../server/src/domain/governance/governance';
import { processNextRun } from '../../server/src/domain/runs/runQueue';
import { WREN_V1_MODEL } from '../../server/src/demo/seeds/competingScore';
import { app, bearer, completedComparison, ownerDataSource, tokenFor, useDatabase } from '../helpers/api';
import { createCohortFixture, createScoreFixture, kestrelRows } from '../helpers/fixtures';

useDatabase();

const as = async (role: Role) => bearer(await tokenFor(role));
let runId: string;
let relied: string;
let other: string;

/** A completed comparison of the two score versions on the cohort version (its job run here); its id. */
const comparison = async (body: Record<string, unknown>): Promise<string> => (await completedComparison(body)).id;

beforeAll(async () => {
  while (await processNextRun());
  const first = await createScoreFixture();
  const second = await createScoreFixture({ model: WREN_V1_MODEL });
  const cohort = await createCohortFixture(kestrelRows(400, 91));
  const pair = {
    firstScoreVersionId: first.scoreVersionId,
    secondScoreVersionId: second.scoreVersionId,
    cohortVersionId: cohort.cohortVersionId,
  };
  relied = await comparison({ ...pair, settings: { bootstrapReplicates: 0 } });
  other = await comparison({ ...pair, settings: { bootstrapReplicates: 0, netBenefitThresholds: [0.1, 0.2] } });
  const run = await request(app)
    .post('/api/runs')
    .set(await as('statistician'))
    .send({ scoreVersionId: first.scoreVersionId, cohortVersionId: cohort.cohortVersionId });
  expect(run.status).toBe(201);
  runId = run.body.run.id;
  while (await processNextRun());
  const review = await request(app)
    .post(`/api/runs/${runId}/review`)
    .set(await as('statistician'))
    .send({ verdict: 'fit for use', reasoning: 'Discriminates better than the alternative.', comparisonId: relied });
  expect(review.status, JSON.stringify(review.body)).toBe(201);
  const signed = await request(app)
    .post(`/api/runs/${runId}/signoff`)
    .set(await as('chair'))
    .send({ decision: 'approve', password: DEMO_PASSWORD });
  expect(signed.status, JSON.stringify(signed.body)).toBe(201);
});

afterAll(async () => {
  await stopBackgroundServices();
});

/** The run's signatures as read after `tamper` ran as the owner with the tables' guards off; all rolled back. */
async function afterTampering(tamper: string, params: unknown[]) {
  const qr = (await ownerDataSource()).createQueryRunner();
  await qr.connect();
  await qr.startTransaction();
  try {
    await qr.query('SET LOCAL session_replication_role = replica'); // user triggers off, in this transaction only
    await qr.query(tamper, params);
    return await listSignatures(runId, qr.manager);
  } finally {
    await qr.rollbackTransaction();
    await qr.release();
  }
}

describe('a signature on a review that names a score comparison', () => {
  it('verifies as signed', async () => {
    const signatures = await listSignatures(runId);
    expect(signatures).toHaveLength(1);
    expect(signatures[0].linkVerified).toBe(true);
  });

  it('no longer verifies when the review is re-pointed at another comparison', async () => {
    const tampered = await afterTampering('UPDATE run_reviews SET comparison_id = $2 WHERE run_id = $1', [
      runId,
      other,
    ]);
    expect(tampered[0].linkVerified).toBe(false);
  });

  it("no longer verifies when the comparison's results hash is changed", async () => {
    const tampered = await afterTampering(
      `UPDATE score_comparisons SET results_sha256 = repeat('0', 64) WHERE id = $1`,
      [relied],
    );
    expect(tampered[0].linkVerified).toBe(false);
  });

  it('a review without a comparison keeps the hash it had before comparisons were sealed', async () => {
    // Signatures made before this change carry no comparison fields: their record hash must read the same.
    const { signatureHash } = await import('../../server/src/domain/governance/governance');
    const base = {
      runId: 'r',
      resultsSha256: 'a'.repeat(64),
      scoreVersionId: 's',
      reviewId: 'v',
      verdict: 'fit for use',
      reasoning: 'x',
      meaning: 'approve for clinical use' as const,
      reason: null,
      signerId: 'u',
      printedName: 'N',
      role: 'chair',
      signedAt: new Date('2026-01-01T00:00:00Z'),
      revokesSignatureId: null,
    };
    const { createHash } = await import('node:crypto');
    const { canonical } = await import('../../server/src/domain/accounts/audit');
    const before = createHash('sha256')
      .update(canonical({ ...base, signedAt: base.signedAt.toISOString() }))
      .digest('hex');
    expect(signatureHash({ ...base, comparison: null })).toBe(before);
    expect(signatureHash({ ...base, comparison: { id: 'c', resultsSha256: 'b'.repeat(64) } })).not.toBe(before);
  });
});
