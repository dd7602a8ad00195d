// The identifier corpus: every HIPAA Safe Harbor category (45 CFR §164.514(b)(2)) and every date family the README
// lists, each placed in the first rows, after row 5,000 and in the last row, in a mapped column, an unmapped column and
// an extra field of a ragged row.
// - Mapped columns: a refusal stops the pass at the first identifier, so each placement is its own file, run through
//   the same steps the upload thread takes (byte check, sample screen, full row check; uploadWorker.ts) and refused.
//   One value of each category and date family also goes through the whole API (after row 5,000), which shows that a
//   refused file leaves nothing stored or served.
// - Unmapped columns and extra fields: one file per placement holds every value; it is stored as a cohort version when
//   the screen lets it through, and each value is searched for in everything stored and served about it.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { kestrelQuarterCsv } from '../../server/src/demo/seeds/kestrelData';
import { KESTREL_MAPPING } from '../../server/src/demo/seeds/cohorts';
import { whenProcessed } from '../../server/src/domain/cohorts/uploads';
import { requiredPredictors } from '../../server/src/domain/cohorts/uploadMapping';
import { csvText, readHeaderAndSample, sniffCsv } from '../../server/src/domain/cohorts/csvFile';
import { screenColumns } from '../../server/src/domain/cohorts/deidentify';
import { checkUploadRows } from '../../server/src/domain/cohorts/uploadCheck';
import { createScoreFixture, FIXTURE_MODEL } from '../helpers/fixtures';
import { app, bearer, dataSource, tokenFor, useDatabase } from '../helpers/api';

useDatabase();

const tmp = mkdtempSync(path.join(tmpdir(), 'plumbline-corpus-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));
const run = `${Date.now()}`;
let versionId = '';
let token = '';

beforeAll(async () => {
  versionId = (await createScoreFixture({ name: `Corpus test score ${run}` })).scoreVersionId;
  token = await tokenFor('steward');
});

// Columns of the demo extract (server/src/demo/seeds/kestrelData.ts).
const AGE = 0,
  PRIOR = 2,
  OUTCOME = 5,
  PERIOD = 6,
  AGE_BAND = 8,
  UNIT = 9;
/** `rows`: how many neighbouring rows hold the value (a patient with several stays repeats, so a name may too). */
type Variant = { category: string; value: string; columns: number[]; rows?: number };
const v = (category: string, value: string, columns: number[] = [UNIT], rows = 1): Variant => ({
  category,
  value,
  columns,
  rows,
});
const DIGITS = [UNIT, PRIOR];
const DATES = [UNIT, PERIOD];

/** Invented values, one or more per category and per date family. */
const VARIANTS: Variant[] = [
  v('names', 'Tamsin Okoro'),
  v('names', 'Oskar J. Brandvold'),
  v('names', 'Ruth Ashdown-Lee'),
  v('names', "Ciaran O'Dowd"),
  // A name repeated in several rows (one patient, several stays), in capitals, surname first, with a title, in a numeric column.
  v('names: repeated in 3 rows', 'Tamsin Okoro', [UNIT], 3),
  v('names: repeated in 12 rows', 'Oskar Brandvold', [UNIT, PRIOR], 12),
  v('names: capitals', 'TAMSIN OKORO', [UNIT], 4),
  v('names: surname first', 'Okoro, Tamsin', [UNIT], 3),
  v('names: title', 'Dr Okoro', [UNIT], 3),
  v('names: accented letters', 'Zoë Ångström', [UNIT], 3),
  v('names: inside a text', 'seen by Tamsin Okoro on the ward', [UNIT, PRIOR]),
  v('names: before a label', 'Dr Okoro, Cedar Ward', [UNIT], 3),
  v('dates: inside a text', 'admitted 14/03/2025 via ED', [UNIT, PRIOR]),
  v('e-mail addresses: inside a text', 'contact tamsin.okoro@example.org', [UNIT]),
  v('geographic subdivision: inside a text', 'lives at 12 Juniper Road', [UNIT]),
  v('free text: a long cell', `note ${'x'.repeat(130)}`, [UNIT]),
  v('names: title and initial', 'Mrs. R. Ashdown-Lee', [UNIT]),
  v('names: surname and initial', 'OKORO, T.', [UNIT], 3),
  v('names: particle', 'Anna van der Berg', [UNIT], 3),
  v('names: in a numeric column', "Ciaran O'Dowd", [PRIOR, AGE], 5),
  v('geographic subdivision', '02139'),
  v('geographic subdivision', '02139-4307'),
  v('geographic subdivision', '12 Juniper Road'),
  v('geographic subdivision', '221B Larch Street'),
  v('geographic subdivision', 'SW1A 1AA'),
  v('geographic subdivision', '4 Alder Close, Eastbury'),
  // Date families (README, "De-identification"): numeric with separators, none, month names, ordinals, ISO week and
  // ordinal dates, date-times, epoch timestamps in a date column.
  v('dates: numeric, year first', '2025-03-14', DATES),
  v('dates: numeric, slashes', '2025/3/14', DATES),
  v('dates: numeric, day first', '14/03/2025', DATES),
  v('dates: numeric, month first, short year', '3/14/25', DATES),
  v('dates: numeric, dots', '14.03.2025', DATES),
  v('dates: numeric, spaces', '14 03 2025', DATES),
  v('dates: numeric, underscores', '14_03_2025', DATES),
  v('dates: no separator', '20250314', [UNIT, PRIOR, PERIOD]),
  v('dates: no separator, day first', '14032025', [UNIT, PRIOR]),
  v('dates: month name, day first', '14 Mar 2025', DATES),
  v('dates: month name, dashes', '14-Mar-2025', DATES),
  v('dates: month name, slashes', '14/Mar/2025', DATES),
  v('dates: month name first', 'Mar-14-2025', DATES),
  v('dates: full month name first', 'March 14, 2025', DATES),
  v('dates: ordinal', '14th March 2025', DATES),
  v('dates: ordinal with of', 'Friday 14th of March 2025', DATES),
  v('dates: year first with month name', '2025 Mar 14', DATES),
  v('dates: ISO week date', '2025-W11-5', DATES),
  v('dates: ISO week', '2025-W11', DATES),
  v('dates: ISO ordinal date', '2025-073', DATES),
  v('dates: date-time', '2025-03-14T10:30:00Z', DATES),
  v('dates: date-time with zone', '2025-03-14 10:30:00+01:00', DATES),
  v('dates: e-mail style', 'Fri, 14 Mar 2025 10:30:00 GMT', DATES),
  v('dates: compact date-time', '20250314T1030', DATES),
  v('dates: birth date', '1950-03-14', DATES),
  // Six digits as YYMMDD, DDMMYY or MMDDYY: refused in a numeric predictor without a stated range, outside age's 0–120,
  // in the outcome and the period (README, "Date rules").
  v('dates: six digits, YYMMDD', '250314', [UNIT, PRIOR, AGE, OUTCOME, PERIOD]),
  v('dates: six digits, DDMMYY', '140325', [UNIT, PRIOR, AGE, OUTCOME, PERIOD]),
  v('dates: six digits, MMDDYY', '031425', [PRIOR, OUTCOME]),
  v('dates: six digits with a point', '250314.0', [PRIOR, AGE]),
  v('dates: epoch seconds', '1741950000', [UNIT, PRIOR, PERIOD]),
  v('dates: epoch milliseconds', '1741950000000', [UNIT, PRIOR, PERIOD]),
  v('telephone numbers', '(555) 201-4477', DIGITS),
  v('telephone numbers', '+44 20 7946 0958', DIGITS),
  v('telephone numbers', '555.201.4477', DIGITS),
  v('telephone numbers', '5552014477', DIGITS),
  v('fax numbers', '+1 555 301 1234', DIGITS),
  v('e-mail addresses', 'tamsin.okoro@example.org'),
  v('e-mail addresses', 'o.brandvold+ward@mail.example'),
  v('social security numbers', '078-05-1120', DIGITS),
  v('social security numbers', '078051120', DIGITS),
  v('medical record numbers', 'MRN00482913'),
  v('medical record numbers', 'MRN-0048291'),
  v('medical record numbers', 'HN880123'),
  v('medical record numbers', '00482913', DIGITS),
  v('health plan beneficiary numbers', 'XKB123456789'),
  v('health plan beneficiary numbers', 'HP-77120934'),
  v('account numbers', 'ACCT-99182734'),
  v('account numbers', '4111111111111111', DIGITS),
  v('certificate/licence numbers', 'D1234-56789-01234'),
  v('certificate/licence numbers', 'DL-A1234567'),
  v('vehicle identifiers', '1HGCM82633A004352'),
  v('vehicle identifiers', '1M8GDM9AXKP042788'),
  v('device identifiers', '00:1A:2B:3C:4D:5E'),
  v('device identifiers', 'SN-12345678'),
  v('device identifiers', 'UDI(01)00844588003288'),
  v('web URLs', 'https://portal.example.org/p/77'),
  v('web URLs', 'www.example.org/patient/77'),
  v('IP addresses', '10.0.3.17'),
  v('IP addresses', '2001:db8::8a2e:370:7334'),
  v('biometric identifiers', 'FP-9f3a2b7c11d4'),
  v('biometric identifiers', 'a3f9c2d8e7b6a5f4'),
  v('full-face photographs', 'IMG_20250314_103000.jpg'),
  v('full-face photographs', 'face_0482913.png'),
  v('unique identifying numbers', 'KX4007919'),
  v('unique identifying numbers', 'a1b2c3d4-e5f6-4a7b-8c9d-0e1f2a3b4c5d'),
  v('ages over 89', '93', [AGE]),
  v('ages over 89', '104', [AGE]),
  v('ages over 89', '90-94', [AGE_BAND]),
  v('ages over 89', '95+', [AGE_BAND]),
];

const SMALL = 40; // rows of a file whose identifier sits in the first rows (inside the screen's sample)
const LARGE = 5_100; // rows of a file whose identifier sits after row 5,000 or in the last row
const base = {
  small: [...kestrelQuarterCsv({ year: 2025, quarter: 2, index: 5, n: SMALL, seed: 21 })],
  large: [...kestrelQuarterCsv({ year: 2025, quarter: 2, index: 5, n: LARGE, seed: 22 })],
};
type Place = 'first rows' | 'after row 5,000' | 'last row';
const PLACES: Place[] = ['first rows', 'after row 5,000', 'last row'];
/** The file line (header = 1) where a variant goes; k spreads batched variants over neighbouring lines. */
const lineFor = (place: Place, k = 0) =>
  place === 'first rows' ? 2 + k : place === 'after row 5,000' ? 5_002 + k : LARGE + 1 - k;
const linesFor = (place: Place, batched = false) => [...(place === 'first rows' && !batched ? base.small : base.large)];

let ran = 0;
const outcomes = { refused: 0, absent: 0 };
afterAll(() => {
  console.log(
    `identifier corpus: ${ran} variants ran (${VARIANTS.length} values; ${outcomes.refused} refused, ${outcomes.absent} accepted files proven to hold and serve none of them)`,
  );
});

function writeCsv(lines: string[]): string {
  const file = path.join(tmp, `${Math.random().toString(36).slice(2)}.csv`);
  writeFileSync(file, lines.join('\n') + '\n');
  return file;
}
async function post(file: string) {
  return request(app)
    .post('/api/cohorts')
    .set(bearer(token))
    .field('scoreVersionId', versionId)
    .field('cohortName', `Corpus ${run} ${Math.random().toString(36).slice(2, 10)}`)
    .attach('file', file);
}
async function mapAndWait(id: string) {
  const res = await request(app)
    .post(`/api/uploads/${id}/mapping`)
    .set(bearer(token))
    .send({ mapping: KESTREL_MAPPING });
  expect(res.status, JSON.stringify(res.body)).toBe(202);
  await whenProcessed(id);
  return (await request(app).get(`/api/uploads/${id}`).set(bearer(token))).body.upload;
}

/** All text served about an upload and, once stored, its cohort version (every page of rows), and all text stored. */
async function everything(
  uploadId: string,
  cohort?: { cohortId: string; version: number; cohortVersionId: string },
): Promise<string> {
  const parts: string[] = [];
  for (const url of [
    `/api/uploads/${uploadId}`,
    `/api/uploads/${uploadId}/rejections?pageSize=500`,
    `/api/uploads/${uploadId}/rejections.csv`,
  ]) {
    parts.push((await request(app).get(url).set(bearer(token))).text);
  }
  const [u] = await dataSource.query('SELECT to_jsonb(u)::text AS j FROM cohort_uploads u WHERE id = $1', [uploadId]);
  parts.push(u.j);
  parts.push(
    JSON.stringify(
      await dataSource.query('SELECT column_name, value, reason FROM cohort_upload_rejections WHERE upload_id = $1', [
        uploadId,
      ]),
    ),
  );
  parts.push(JSON.stringify(await dataSource.query(`SELECT details FROM audit_log WHERE target_id = $1`, [uploadId])));
  if (cohort) {
    parts.push(
      (await request(app).get(`/api/cohorts/${cohort.cohortId}/versions/${cohort.version}`).set(bearer(token))).text,
    );
    for (let page = 1; page <= Math.ceil(LARGE / 500) + 1; page++) {
      parts.push(
        (
          await request(app)
            .get(`/api/cohorts/${cohort.cohortId}/versions/${cohort.version}/rows`)
            .query({ page, pageSize: 500 })
            .set(bearer(token))
        ).text,
      );
    }
    const [cv] = await dataSource.query('SELECT to_jsonb(v)::text AS j FROM cohort_versions v WHERE id = $1', [
      cohort.cohortVersionId,
    ]);
    parts.push(cv.j);
    const blocks = await dataSource.query(
      'SELECT text_levels::text AS t, num_names::text AS n, cat_names::text AS c, sub_names::text AS s FROM cohort_row_blocks WHERE cohort_version_id = $1',
      [cohort.cohortVersionId],
    );
    parts.push(JSON.stringify(blocks));
  }
  return parts.join('\n');
}

/** Values of four characters or fewer (ages) occur by chance in ids and numbers: their proof is the refusal alone. */
const searchable = (value: string) => value.length > 4;

const csvField = (value: string) => (/[",\n]/.test(value) ? `"${value.replace(/"/g, '""')}"` : value);
function placed(variant: Variant, col: number, place: Place): string[] {
  const lines = linesFor(place);
  for (let k = 0; k < (variant.rows ?? 1); k++) {
    const line = lineFor(place, k);
    const cells = lines[line - 1].split(',');
    cells[col] = csvField(variant.value);
    lines[line - 1] = cells.join(',');
  }
  return lines;
}

/** The upload thread's steps on one file (uploadWorker.ts: screen, then the row check): the refusal, or null. */
async function refusalOf(file: string): Promise<string | null> {
  const { delimiter, bytes } = await sniffCsv(file);
  for await (const piece of csvText(file)) void piece;
  const { headers, sample } = await readHeaderAndSample(file, delimiter, 5000);
  const screen = screenColumns(headers, sample);
  if (screen.refused.length) return `screen: ${screen.refused.map((r) => r.category).join(', ')}`;
  const result = await checkUploadRows(
    {
      path: file,
      delimiter,
      headers,
      mapping: { ...KESTREL_MAPPING, ranges: {} },
      predictors: requiredPredictors({ mode: 'formula', model: FIXTURE_MODEL, probabilityColumn: null }),
      supplied: false,
      plannedVersionId: '0b7c5d0e-1f2a-4b3c-8d4e-5f6a7b8c9d0e',
      totalBytes: bytes,
    },
    { rows: () => {}, progress: () => {} },
  );
  return result.refusal ? `row check: ${result.refusal.category}` : null;
}

describe('identifier corpus: mapped columns (each placement its own file, refused)', () => {
  const cases = VARIANTS.flatMap((variant) =>
    variant.columns.flatMap((col) => PLACES.map((place) => ({ variant, col, place }))),
  );
  it(`refuses each of ${cases.length} placements`, async () => {
    const failures: string[] = [];
    for (const { variant, col, place } of cases) {
      const refusal = await refusalOf(writeCsv(placed(variant, col, place)));
      if (!refusal)
        failures.push(`${variant.category} ${JSON.stringify(variant.value)} in column ${col}, ${place}: not refused`);
      ran++;
      outcomes.refused++;
    }
    expect(failures).toEqual([]);
  }, 600_000);

  const firstOfEach = VARIANTS.filter((x, i) => VARIANTS.findIndex((y) => y.category === x.category) === i);
  it(`through the API, ${firstOfEach.length} values (one per category and date family): refused, nothing stored or served`, async () => {
    const failures: string[] = [];
    const one = async (variant: Variant) => {
      const res = await post(writeCsv(placed(variant, variant.columns[0], 'after row 5,000')));
      const label = `${variant.category} ${JSON.stringify(variant.value)}`;
      if (res.status !== 201) {
        failures.push(`${label}: answered ${res.status}`);
        return;
      }
      const u = await mapAndWait(res.body.upload.id);
      if (u.status !== 'refused') {
        failures.push(`${label}: ${u.status}, not refused`);
        return;
      }
      const text = JSON.stringify(res.body) + (await everything(u.id));
      if (searchable(variant.value) && text.includes(variant.value))
        failures.push(`${label}: the value was served or stored`);
    };
    // A few at a time: the upload threads check files side by side.
    const queue = [...firstOfEach];
    await Promise.all(
      Array.from({ length: 3 }, async () => {
        for (let c = queue.shift(); c; c = queue.shift()) await one(c);
      }),
    );
    expect(failures).toEqual([]);
  }, 600_000);
});

describe('identifier corpus: unmapped columns and extra fields (batched uploads, nothing kept)', () => {
  const texts = VARIANTS.filter((x) => searchable(x.value));
  it.each(PLACES)(
    '%s: in an unmapped column',
    async (place) => {
      const lines = linesFor(place, true).map((l, i) => `${l},${i === 0 ? 'free_text' : 'n'}`);
      texts.forEach((x, k) => {
        const line = lineFor(place, k);
        lines[line - 1] = lines[line - 1].replace(/,n$/, `,${csvField(x.value)}`);
      });
      await expectNoneKept(
        lines,
        texts.map((x) => x.value),
        place,
      );
    },
    120_000,
  );
  it.each(PLACES)(
    '%s: as extra fields of ragged rows',
    async (place) => {
      const lines = linesFor(place, true);
      texts.forEach((x, k) => {
        const line = lineFor(place, k);
        lines[line - 1] += `,${csvField(x.value)},${k}`;
      });
      await expectNoneKept(
        lines,
        texts.map((x) => x.value),
        place,
      );
    },
    120_000,
  );

  async function expectNoneKept(lines: string[], values: string[], place: Place) {
    const res = await post(writeCsv(lines));
    let text = JSON.stringify(res.body);
    if (res.status === 201) {
      const u = await mapAndWait(res.body.upload.id);
      expect(u.status, `${place}: ${u.error}`).toBe('checked');
      const stored = await request(app)
        .post(`/api/uploads/${u.id}/commit`)
        .set(bearer(token))
        .send({ excludeRejected: true });
      expect(stored.status, JSON.stringify(stored.body)).toBe(201);
      text += await everything(u.id, stored.body);
      outcomes.absent++;
    } else {
      // The screen saw them in its sample and refused the file: nothing was kept.
      expect(res.status, text).toBe(422);
      outcomes.refused++;
    }
    const kept = values.filter((value) => text.includes(value));
    expect(kept, `${place}: values found in what is stored or served`).toEqual([]);
    ran += values.length;
  }
});
