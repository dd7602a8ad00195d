// A real server (child process) on its own throwaway cluster: temp files left by a crash are swept at start, and an
// upload whose check is cut off by a PostgreSQL outage is marked failed once the database is back (not left
// "processing" until a restart).
import { randomUUID } from 'node:crypto';
import { existsSync, mkdtempSync, readdirSync, rmSync, utimesSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DEMO_PASSWORD } from '../../server/src/platform/config';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { ServerProcess } from '../helpers/childServer';
import { createPreparedCluster, freePort, insertFixtureScore, type ThrowawayCluster } from '../helpers/throwawayPg';

let cluster: ThrowawayCluster;
let server: ServerProcess;
let scoreVersionId: string;
const uploadDir = mkdtempSync(path.join(tmpdir(), 'plumbline-outage-uploads-'));
const orphan = `${randomUUID()}.csv`;
const foreign = 'operator-notes.txt';

beforeAll(async () => {
  cluster = await createPreparedCluster();
  scoreVersionId = insertFixtureScore(cluster, 'Outage test score');
  // Left by a crash an hour ago: a received file no upload refers to, and a file that is not ours.
  const hourAgo = new Date(Date.now() - 60 * 60 * 1000);
  for (const f of [orphan, foreign]) {
    writeFileSync(path.join(uploadDir, f), 'outcome,risk\n1,0.5\n');
    utimesSync(path.join(uploadDir, f), hourAgo, hourAgo);
  }
  server = new ServerProcess(await freePort(3800, 100), {
    ...cluster.env(),
    PLUMBLINE_BCRYPT_COST: '4',
    PLUMBLINE_UPLOAD_DIR: uploadDir,
  });
  await server.start();
}, 180_000);

afterAll(async () => {
  await server?.kill('SIGTERM');
  cluster?.destroy();
  rmSync(uploadDir, { recursive: true, force: true });
});

const waitFor = async (what: string, ok: () => Promise<boolean> | boolean, timeoutMs: number) => {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    if (
      await Promise.resolve()
        .then(ok)
        .catch(() => false)
    )
      return;
    await new Promise((r) => setTimeout(r, 200));
  }
  throw new Error(`timed out waiting for ${what}:\n${server.output.slice(-3000)}`);
};

describe('at start', () => {
  it('temp files no upload refers to are swept; other files stay', async () => {
    await waitFor('the orphaned temp file to go', () => !existsSync(path.join(uploadDir, orphan)), 30_000);
    expect(readdirSync(uploadDir)).toContain(foreign);
  });
});

describe('an upload check cut off by a database outage', () => {
  it('is marked failed when PostgreSQL returns', async () => {
    // Large enough that the check is still running when the database stops. Made before signing in: the few seconds
    // it takes would otherwise let the server's keep-alive timer close the connection fetch reuses for the upload.
    const form = new FormData();
    form.set('scoreVersionId', scoreVersionId);
    form.set('cohortName', 'Outage cohort');
    form.set(
      'file',
      new Blob([`${[...kestrelQuarterCsv({ year: 2025, quarter: 4, index: 7, n: 500_000, seed: 5 })].join('\n')}\n`]),
      'big.csv',
    );
    const login = await server.login('steward@demo.test', DEMO_PASSWORD);
    expect(login.status).toBe(200);
    const auth = { Authorization: `Bearer ${login.token}` };
    const up = await server.fetchJson('/api/cohorts', { method: 'POST', headers: auth, body: form }, 120_000);
    expect(up.status, JSON.stringify(up.body)).toBe(201);
    const id = (up.body.upload as { id: string }).id;
    const mapped = await server.fetchJson(`/api/uploads/${id}/mapping`, {
      method: 'POST',
      headers: { ...auth, 'Content-Type': 'application/json' },
      body: JSON.stringify({ mapping: KESTREL_MAPPING }),
    });
    expect(mapped.status, JSON.stringify(mapped.body)).toBe(202);
    // The check is a job: stop the database once the server's worker has claimed it, not before.
    await waitFor(
      'the check job to be claimed',
      () =>
        cluster.psql(`SELECT state FROM pgboss.job WHERE name = 'upload-check' AND data->>'uploadId' = '${id}'`) ===
        'active',
      60_000,
    );

    cluster.stop('immediate');
    // The check fails with the database, and so does the first try to record that.
    await waitFor(
      'the check to fail on the outage',
      () => server.output.split('\n').some((line) => line.includes('checking an upload failed') && line.includes(id)),
      60_000,
    );
    await waitFor(
      'the failure record to wait for the database',
      () => server.output.includes('trying again until the database answers'),
      30_000,
    );

    cluster.start();
    let status = '';
    let error = '';
    await waitFor(
      'the upload to be marked failed',
      async () => {
        const got = await server.fetchJson(`/api/uploads/${id}`, { headers: auth });
        status = (got.body.upload as { status: string } | undefined)?.status ?? '';
        error = (got.body.upload as { error: string } | undefined)?.error ?? '';
        return status === 'failed';
      },
      90_000,
    );
    expect(error).toMatch(/could not be processed.*nothing was stored/);
    expect(
      cluster.psql(
        `SELECT count(*) FROM cohort_row_blocks b JOIN cohort_uploads u ON u.planned_version_id = b.cohort_version_id WHERE u.id = '${id}'`,
      ),
    ).toBe('0');
    expect(server.alive).toBe(true);
  });
});
