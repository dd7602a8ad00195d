// Fuzz-style hostile input, seeded so a failure replays: malformed JSON bodies for every POST/PUT/PATCH route in the
// table, and malformed CSV files for the cohort upload. Each must get a 4xx with a clear JSON message, the server
// must stay up, and no row may be added or removed anywhere.
import { vi } from 'vitest';

vi.hoisted(() => {
  process.env.PLUMBLINE_LOGIN_MAX_PER_IP = '100000';
  process.env.PLUMBLINE_LOGIN_MAX_FAILURES = '100000';
});

import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { app, bearer, dataSource, tokenFor, useDatabase } from '../helpers/api';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { whenProcessed } from '../../server/src/domain/cohorts/uploads';
import { createScoreFixture } from '../helpers/fixtures';
import {
  callerFor,
  concretePath,
  fieldPaths,
  jsonBodyRoutes,
  leakMarkers,
  routeKey,
  routes,
  setPath,
  tableCounts,
} from '../helpers/routeProbe';
import { exampleOf } from '../helpers/zodExample';

useDatabase();

const SEED = Number(process.env.PLUMBLINE_FUZZ_SEED ?? 20260601);
// mulberry32 (Tommy Ettinger, public domain), common practice for a small seeded PRNG.
function prng(seed: number) {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}
const rand = prng(SEED);
const pick = <T>(xs: readonly T[]): T => xs[Math.floor(rand() * xs.length)];
const randInt = (lo: number, hi: number) => lo + Math.floor(rand() * (hi - lo + 1));
const randomBytes = (n: number) => Buffer.from(Array.from({ length: n }, () => randInt(0, 255)));

// Audit rows of refused sign-ins and cohort upload refusals are expected; every other table must not move.
const MAY_CHANGE = ['audit_log', 'audit_checkpoints']; // a refusal is audited, and each audit write records the new head
const counts = () => tableCounts((sql) => dataSource.query(sql), MAY_CHANGE);

interface Case {
  label: string;
  raw?: Buffer | string;
  body?: unknown;
  contentType?: string;
}

const WRONG_TYPES: unknown[] = [null, 0, -1, 1e308, true, [], {}, 'x', [1, 2, 3], { nested: { deeper: 1 } }];

function deep(levels: number, kind: 'array' | 'object'): string {
  return kind === 'array'
    ? `${'['.repeat(levels)}1${']'.repeat(levels)}`
    : `${'{"a":'.repeat(levels)}1${'}'.repeat(levels)}`;
}

/** Cases for one route: syntax-level breakage plus a mutation of each field of a plausible valid body. */
function casesFor(route: (typeof routes)[number]): Case[] {
  const base = (exampleOf(route.body) as Record<string, unknown> | undefined) ?? {};
  const baseText = JSON.stringify(base);
  const cases: Case[] = [
    {
      label: 'truncated JSON',
      raw: baseText.slice(0, Math.max(1, randInt(1, baseText.length - 1))) || '{',
      contentType: 'application/json',
    },
    { label: 'truncated JSON (open string)', raw: '{"a": "unterminated', contentType: 'application/json' },
    { label: 'trailing garbage', raw: `${baseText}}}`, contentType: 'application/json' },
    { label: 'single quotes', raw: baseText.replace(/"/g, "'"), contentType: 'application/json' },
    {
      label: 'raw NUL bytes',
      raw: Buffer.concat([Buffer.from('{"a":"'), Buffer.from([0, 0, 0]), Buffer.from('"}')]),
      contentType: 'application/json',
    },
    {
      label: 'invalid UTF-8 bytes in a string',
      raw: Buffer.concat([
        Buffer.from(baseText.slice(0, -1) + (baseText.length > 2 ? ',' : '') + '"x":"'),
        Buffer.from([0xc3, 0x28, 0xff, 0xfe, 0xed, 0xa0, 0x80]),
        Buffer.from('"}'),
      ]),
      contentType: 'application/json',
    },
    { label: 'random bytes', raw: randomBytes(randInt(1, 2000)), contentType: 'application/json' },
    { label: 'deep array nesting', raw: deep(randInt(2000, 20000), 'array'), contentType: 'application/json' },
    { label: 'deep object nesting', raw: deep(randInt(2000, 20000), 'object'), contentType: 'application/json' },
    {
      label: 'body over 1 MB',
      raw: JSON.stringify({ ...base, pad: 'p'.repeat(1_100_000) }),
      contentType: 'application/json',
    },
    { label: 'JSON as text/plain', raw: baseText, contentType: 'text/plain' },
    { label: 'top-level array', body: [base] },
    { label: 'top-level string', raw: '"just a string"', contentType: 'application/json' },
    { label: 'top-level number', raw: '42', contentType: 'application/json' },
    {
      label: 'prototype pollution (__proto__)',
      raw: '{"__proto__": {"polluted": "yes", "role": "admin", "isAdmin": true}}',
      contentType: 'application/json',
    },
    {
      label: 'prototype pollution (constructor.prototype)',
      raw: '{"constructor": {"prototype": {"polluted": "yes"}}}',
      contentType: 'application/json',
    },
  ];
  for (const p of fieldPaths(route.body)) {
    const at = (v: unknown) => {
      const merged = structuredClone(base) as Record<string, unknown>;
      let cur: Record<string, unknown> = merged;
      for (const k of p.slice(0, -1))
        cur = (cur[k] =
          typeof cur[k] === 'object' && cur[k] !== null ? (cur[k] as Record<string, unknown>) : {}) as Record<
          string,
          unknown
        >;
      cur[p[p.length - 1]] = v;
      return merged;
    };
    const name = p.join('.');
    cases.push({
      label: `${name}: wrong type`,
      body: at(pick(WRONG_TYPES.filter((w) => typeof w !== typeof getPath(base, p)))),
    });
    cases.push({ label: `${name}: huge string`, body: at('h'.repeat(randInt(100_000, 900_000))) });
    cases.push({ label: `${name}: NUL character`, body: at(`fuzz\u0000text`) });
    cases.push({ label: `${name}: lone surrogate`, body: at(`fuzz\ud800text`) });
    cases.push({
      label: `${name}: __proto__ inside`,
      raw: JSON.stringify(setPath(p, { __proto__x: 1 })).replace('__proto__x', '__proto__'),
      contentType: 'application/json',
    });
  }
  return cases;
}

function getPath(obj: unknown, p: string[]): unknown {
  return p.reduce<unknown>((o, k) => (o && typeof o === 'object' ? (o as Record<string, unknown>)[k] : undefined), obj);
}

function problemsOf(label: string, res: request.Response): string[] {
  const out: string[] = [];
  if (res.status < 400 || res.status >= 500) out.push(`${label} → ${res.status} ${res.text.slice(0, 160)}`);
  if (!/json/.test(String(res.headers['content-type'])))
    out.push(`${label} → not JSON (${res.headers['content-type']})`);
  else if (typeof res.body?.error !== 'string' || res.body.error.length < 5)
    out.push(`${label} → no clear message: ${res.text.slice(0, 160)}`);
  const leaks = leakMarkers(res.text);
  if (leaks.length) out.push(`${label} leaks ${leaks.join(', ')}`);
  return out;
}

const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-fuzz-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));
let scoreVersionId = '';
beforeAll(async () => {
  scoreVersionId = (await createScoreFixture({ name: `Fuzz score ${Date.now()}` })).scoreVersionId;
});

describe(`fuzz (seed ${SEED})`, () => {
  it('malformed JSON bodies on every POST/PUT/PATCH route: 4xx with a message, server up, no rows changed', async () => {
    const before = await counts();
    const problems: string[] = [];
    let n = 0;
    const started = Date.now();
    for (const route of jsonBodyRoutes()) {
      const role = callerFor(route.access);
      const token = role ? await tokenFor(role) : null;
      for (const c of casesFor(route)) {
        n++;
        const label = `${routeKey(route)} [${c.label}]`;
        let req = (request(app) as unknown as Record<string, (p: string) => request.Test>)[route.method](
          concretePath(route.path),
        );
        if (token) req = req.set(bearer(token));
        if (c.raw !== undefined)
          req = req.set('Content-Type', c.contentType ?? 'application/json').send(c.raw as string);
        else req = req.send(c.body as object);
        const res = await req;
        problems.push(...problemsOf(label, res));
      }
    }
    // Prototype pollution would show up on every object in this process (the app runs in it).
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
    expect(({} as Record<string, unknown>).isAdmin).toBeUndefined();
    expect((await request(app).get('/api/health')).status).toBe(200);
    console.log(
      `fuzz JSON: ${n} cases over ${jsonBodyRoutes().length} routes in ${Date.now() - started} ms (seed ${SEED})`,
    );
    expect(problems).toEqual([]);
    expect(await counts()).toEqual(before);
  });

  const hasUpload = routes.some((r) => r.method === 'post' && r.path === '/api/cohorts');
  it.runIf(hasUpload)(
    'malformed CSV uploads to POST /api/cohorts: refused with a clear 4xx, or broken rows rejected by the checks; server up, nothing stored',
    async () => {
      const token = await tokenFor('steward');
      const header =
        'age,length_of_stay,prior_admissions,emergency_admission,charlson_index,readmitted_30d,discharge_date';
      const line = () =>
        `${randInt(18, 95)},${randInt(1, 30)},${randInt(0, 5)},${pick(['yes', 'no'])},${randInt(0, 8)},${randInt(0, 1)},2025-0${randInt(1, 9)}-1${randInt(0, 9)}`;
      const csvs: { label: string; data: Buffer }[] = [
        { label: 'empty file', data: Buffer.alloc(0) },
        { label: 'only a newline', data: Buffer.from('\n') },
        { label: 'header only', data: Buffer.from(`${header}\n`) },
        {
          label: 'huge single field',
          data: Buffer.from(`${header}\n"${'f'.repeat(5_000_000)}",1,1,yes,1,0,2025-01-01\n`),
        },
        {
          label: '10,000 columns',
          data: Buffer.from(
            `${Array.from({ length: 10_000 }, (_, i) => `c${i}`).join(',')}\n${Array.from({ length: 10_000 }, () => '1').join(',')}\n`,
          ),
        },
        {
          label: 'deeply nested quotes',
          data: Buffer.from(`${header}\n${'"'.repeat(4001)}abc${'"'.repeat(4001)},1,1,yes,1,0,2025-01-01\n`),
        },
        {
          label: 'unbalanced quote',
          data: Buffer.from(`${header}\n"unterminated,1,1,yes,1,0,2025-01-01\n${line()}\n`),
        },
        {
          label: 'invalid UTF-8 in the header',
          data: Buffer.concat([Buffer.from('age,'), Buffer.from([0xff, 0xfe, 0xc3, 0x28]), Buffer.from(`,x\n1,2,3\n`)]),
        },
        {
          label: 'NUL bytes',
          data: Buffer.concat([Buffer.from(`${header}\n`), Buffer.from([0, 0, 0, 0]), Buffer.from(`\n${line()}\n`)]),
        },
        {
          label: 'NUL bytes in the header',
          data: Buffer.concat([Buffer.from('age\u0000,los\u0000\n'), Buffer.from('1,2\n')]),
        },
        {
          label: 'UTF-16 with BOM',
          data: Buffer.concat([Buffer.from([0xff, 0xfe]), Buffer.from(`${header}\n${line()}\n`, 'utf16le')]),
        },
        { label: 'duplicate header names', data: Buffer.from(`age,age,age\n1,2,3\n`) },
        {
          label: 'binary (PNG signature)',
          data: Buffer.concat([Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]), randomBytes(4000)]),
        },
        { label: 'gzip bytes', data: Buffer.concat([Buffer.from([0x1f, 0x8b, 0x08, 0x00]), randomBytes(3000)]) },
      ];
      for (let i = 0; i < 12; i++) csvs.push({ label: `random bytes #${i}`, data: randomBytes(randInt(1, 20_000)) });
      for (let i = 0; i < 4; i++)
        csvs.push({
          label: `random text bytes without NUL #${i}`,
          data: Buffer.from(Array.from({ length: randInt(50, 20_000) }, () => randInt(1, 255))),
        });
      // Structural breakage of an otherwise acceptable file (invented Kestrel data, passes the identifier screen).
      const good = () => [
        ...kestrelQuarterCsv({ year: 2025, quarter: 1, index: 4, n: randInt(20, 60), seed: randInt(1, 1e6) }),
      ];
      for (let i = 0; i < 6; i++) {
        const [head, ...rows] = good();
        const broken = rows.map((r, j) =>
          j % 7 === 3 ? `${r},extra,cells` : j % 11 === 5 ? r.split(',').slice(0, 3).join(',') : r,
        );
        csvs.push({
          label: `CRLF/LF/CR mix with ragged rows #${i}`,
          data: Buffer.from([head, ...broken].map((r) => r + pick(['\n', '\r\n', '\r'])).join('')),
        });
      }
      for (let i = 0; i < 3; i++) {
        const [head, ...rows] = good();
        rows[randInt(0, rows.length - 1)] =
          `${'"'.repeat(2 * randInt(50, 2000) + 1)}70,3,1,yes,2,no,2025-01,F,65-79,Birch,Main campus`;
        csvs.push({ label: `nested quotes in a data row #${i}`, data: Buffer.from(`${[head, ...rows].join('\n')}\n`) });
      }
      {
        const [head, ...rows] = good();
        rows[1] = `${'9'.repeat(3_000_000)},3,1,yes,2,no,2025-01,F,65-79,Birch,Main campus`;
        csvs.push({ label: 'a 3 MB field in a data row', data: Buffer.from(`${[head, ...rows].join('\n')}\n`) });
      }
      // Refused and discarded uploads stay on record (cohort_uploads, their rejections); stored cohorts must not move.
      const stored = () =>
        tableCounts((sql) => dataSource.query(sql), [...MAY_CHANGE, 'cohort_uploads', 'cohort_upload_rejections']);
      const before = await stored();
      let followed = 0;
      const problems: string[] = [];
      const outcomes: Record<string, number> = {};
      const started = Date.now();
      for (const [i, c] of csvs.entries()) {
        const file = path.join(tmp, `fuzz-${i}.csv`);
        writeFileSync(file, c.data);
        const res = await request(app)
          .post('/api/cohorts')
          .set(bearer(token))
          .field('scoreVersionId', scoreVersionId)
          .field('cohortName', `Fuzz cohort ${Date.now()}-${i}`)
          .attach('file', file);
        outcomes[res.status] = (outcomes[res.status] ?? 0) + 1;
        if (process.env.PLUMBLINE_FUZZ_VERBOSE) console.log(c.label, res.status, String(res.body?.error).slice(0, 140));
        if (res.status === 201) {
          // Passed the screen (it reads the header and a sample): the row checks must then reject the broken rows with
          // reasons, or fail the upload with a message — and nothing is stored until a commit, which we never send.
          followed++;
          const id = res.body.upload.id as string;
          const mapped = await request(app)
            .post(`/api/uploads/${id}/mapping`)
            .set(bearer(token))
            .send({ mapping: res.body.upload.suggestedMapping ?? KESTREL_MAPPING });
          let view = mapped.body.upload as { status: string; rowsRejected: number; error: string | null } | undefined;
          if (mapped.status >= 400) problems.push(...problemsOf(`CSV [${c.label}] mapping`, mapped));
          // The check is a job: this process has no job workers, so it runs the waiting check itself (as the seed does).
          if (view?.status === 'processing') {
            await whenProcessed(id);
            view = (await request(app).get(`/api/uploads/${id}`).set(bearer(token))).body.upload;
          }
          if (view && view.status === 'checked' && view.rowsRejected === 0)
            problems.push(`${c.label}: every broken row was accepted`);
          if (view && view.status === 'failed' && !view.error) problems.push(`${c.label}: failed without a message`);
          if (view && !['checked', 'failed', 'refused'].includes(view.status))
            problems.push(`${c.label}: upload left ${view.status}`);
          expect((await request(app).post(`/api/uploads/${id}/discard`).set(bearer(token))).status).toBeLessThan(300);
        } else problems.push(...problemsOf(`CSV [${c.label}]`, res));
      }
      expect((await request(app).get('/api/health')).status).toBe(200);
      console.log(
        `fuzz CSV: ${csvs.length} files in ${Date.now() - started} ms, statuses ${JSON.stringify(outcomes)}, ${followed} followed through the row checks (seed ${SEED})`,
      );
      expect(problems).toEqual([]);
      expect(await stored()).toEqual(before);
    },
  );
});
