// Temp files of uploads that never finished: a request cut off mid-body, a body that ends before its closing boundary,
// and files left by a crash (swept). A folder of this file's own, so nothing another test writes is counted.
import { randomUUID } from 'node:crypto';
import { mkdtempSync, readdirSync, rmSync, utimesSync, writeFileSync } from 'node:fs';
import type { AddressInfo } from 'node:net';
import net from 'node:net';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';

const dir = await vi.hoisted(async () => {
  // Set before the server modules are imported: they read PLUMBLINE_UPLOAD_DIR once.
  const fs = await import('node:fs');
  const os = await import('node:os');
  const p = await import('node:path');
  const made = fs.mkdtempSync(p.join(os.tmpdir(), 'plumbline-leftovers-'));
  process.env.PLUMBLINE_UPLOAD_DIR = made;
  return made;
});

import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { uploadDir } from '../../server/src/http/routes/cohorts';
import { sweepUploadDir } from '../../server/src/domain/cohorts/uploadSweep';
import { app, bearer, dataSource, tokenFor, useDatabase } from '../helpers/api';
import { createScoreFixture, FIXTURE_MODEL } from '../helpers/fixtures';

useDatabase();

const files = () => readdirSync(dir);
const csv = (n: number) => `${[...kestrelQuarterCsv({ year: 2025, quarter: 1, index: 4, n, seed: 3 })].join('\n')}\n`;

let server: ReturnType<typeof app.listen>;
let port = 0;
let scoreVersionId = '';
const scratch = mkdtempSync(path.join(tmpdir(), 'plumbline-leftovers-src-'));

beforeAll(async () => {
  expect(uploadDir).toBe(dir);
  scoreVersionId = (await createScoreFixture({ model: FIXTURE_MODEL })).scoreVersionId;
  server = app.listen(0, '127.0.0.1');
  await new Promise((r) => server.once('listening', r));
  port = (server.address() as AddressInfo).port;
});
afterAll(async () => {
  await new Promise((r) => server.close(r));
  rmSync(dir, { recursive: true, force: true });
  rmSync(scratch, { recursive: true, force: true });
});

/** Polls until `ok` holds or the time is up; returns whether it held. */
async function eventually(ok: () => boolean, ms = 15_000): Promise<boolean> {
  const deadline = Date.now() + ms;
  while (Date.now() < deadline) {
    if (ok()) return true;
    await new Promise((r) => setTimeout(r, 50));
  }
  return ok();
}

/** The head of a multipart upload request and the parts before the file's bytes. */
async function multipartStart(contentLength: number) {
  const boundary = `----plumbline${randomUUID().replace(/-/g, '')}`;
  const token = await tokenFor('steward');
  const parts =
    `--${boundary}\r\nContent-Disposition: form-data; name="scoreVersionId"\r\n\r\n${scoreVersionId}\r\n` +
    `--${boundary}\r\nContent-Disposition: form-data; name="cohortName"\r\n\r\nCut-off cohort ${randomUUID().slice(0, 8)}\r\n` +
    `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="cut.csv"\r\nContent-Type: text/csv\r\n\r\n`;
  const head =
    `POST /api/cohorts HTTP/1.1\r\nHost: 127.0.0.1:${port}\r\nAuthorization: Bearer ${token}\r\n` +
    `Content-Type: multipart/form-data; boundary=${boundary}\r\nContent-Length: ${contentLength}\r\nConnection: close\r\n\r\n`;
  return { head, parts, boundary };
}

describe('a cut-off upload', () => {
  it('aborted by the client mid-body: its temp file is removed at once', async () => {
    expect(files()).toEqual([]);
    const { head, parts } = await multipartStart(50_000_000);
    const socket = net.connect(port, '127.0.0.1');
    await new Promise((r) => socket.once('connect', r));
    socket.write(head + parts);
    socket.write(csv(5_000));
    // The server has started writing the file: then the client goes away.
    expect(await eventually(() => files().length === 1)).toBe(true);
    socket.destroy();
    expect(await eventually(() => files().length === 0), `left: ${files().join(', ')}`).toBe(true);
  });

  it('a body that ends before its closing boundary: refused, and no temp file is left', async () => {
    const { head, parts } = await multipartStart(0);
    const body = parts + csv(2_000); // no closing --boundary--
    const socket = net.connect(port, '127.0.0.1');
    let answer = '';
    socket.on('data', (d) => (answer += d));
    const closed = new Promise((r) => socket.once('close', r));
    socket.write(head.replace('Content-Length: 0', `Content-Length: ${Buffer.byteLength(body)}`) + body);
    await closed;
    expect(answer).toMatch(/^HTTP\/1\.1 400/);
    expect(answer).toMatch(/could not be read/);
    expect(await eventually(() => files().length === 0, 2_000), `left: ${files().join(', ')}`).toBe(true);
  });

  it('a complete upload keeps its file for the next steps (the control)', async () => {
    const source = path.join(scratch, 'whole.csv');
    writeFileSync(source, csv(50));
    const res = await request(app)
      .post('/api/cohorts')
      .set(bearer(await tokenFor('steward')))
      .field('scoreVersionId', scoreVersionId)
      .field('cohortName', `Whole ${randomUUID().slice(0, 8)}`)
      .attach('file', source);
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const [row] = await dataSource.query('SELECT temp_path FROM cohort_uploads WHERE id = $1', [res.body.upload.id]);
    expect(files()).toEqual([path.basename(row.temp_path)]);
    await request(app)
      .post(`/api/uploads/${res.body.upload.id}/discard`)
      .set(bearer(await tokenFor('steward')))
      .expect(200);
    expect(files()).toEqual([]);
  });
});

describe('the sweep of the upload folder (at start and every ten minutes)', () => {
  it('removes old files no upload refers to, and nothing else', async () => {
    const source = path.join(scratch, 'kept.csv');
    writeFileSync(source, csv(50));
    const res = await request(app)
      .post('/api/cohorts')
      .set(bearer(await tokenFor('steward')))
      .field('scoreVersionId', scoreVersionId)
      .field('cohortName', `Kept ${randomUUID().slice(0, 8)}`)
      .attach('file', source);
    expect(res.status).toBe(201);
    const [row] = await dataSource.query('SELECT temp_path FROM cohort_uploads WHERE id = $1', [res.body.upload.id]);
    const referenced = path.basename(row.temp_path);
    const orphan = `${randomUUID()}.csv`;
    const young = `${randomUUID()}.csv`;
    const foreign = 'notes.txt';
    for (const f of [orphan, young, foreign]) writeFileSync(path.join(dir, f), 'a,b\n1,2\n');
    const hourAgo = new Date(Date.now() - 60 * 60 * 1000);
    for (const f of [orphan, foreign, referenced]) utimesSync(path.join(dir, f), hourAgo, hourAgo);

    expect(await sweepUploadDir()).toEqual([orphan]);
    expect(files().sort()).toEqual([referenced, young, foreign].sort());
  });
});
