// The row checks read every file through papaparse, which takes a quicker route through pieces without quotes. A file
// with and without quotes must give the same verdicts, rejections, summaries and stored bytes for the same records:
// here one file is checked twice, once as written and once with its header cells quoted.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { checkUploadRows, type CheckInput } from '../../../server/src/domain/cohorts/uploadCheck';

const dir = mkdtempSync(path.join(tmpdir(), 'plumbline-check-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const HEADER = ['age', 'los', 'emergency', 'died', 'period', 'unit', 'note'];
const mapping = {
  predictors: { age: 'age', los: 'los', emergency: 'emergency' },
  outcome: { column: 'died', positive: ['yes'], negative: ['no'] },
  date: { column: 'period' },
  subgroups: { unit: 'unit' },
  ranges: {},
};
const predictors: CheckInput['predictors'] = [
  { column: 'age', kind: 'numeric', positiveOnly: false },
  { column: 'los', kind: 'numeric', positiveOnly: true },
  { column: 'emergency', kind: 'text', positiveOnly: false },
];

function rows(): string[] {
  const units = ['Birch', 'Cedar', 'Alder', 'Rowan', ' Birch ', ''];
  const out: string[] = [];
  for (let i = 0; i < 25_000; i++) {
    out.push(
      [
        18 + (i % 70),
        1 + (i % 20),
        i % 3 ? 'yes' : 'no',
        i % 9 ? 'no' : 'yes',
        `2025-${String(1 + (i % 12)).padStart(2, '0')}`,
        units[i % units.length],
        `n${i % 40}`,
      ].join(','),
    );
  }
  // One of each kind of bad row, and lines that are not rows.
  out.splice(10, 0, '45,3,yes,no,2025-01,Birch'); // too few fields
  out.splice(20, 0, '45,3,yes,no,2025-01,Birch,n1,extra'); // too many
  out.splice(30, 0, '=1+2,3,yes,no,2025-01,Birch,n1'); // formula-looking cell
  out.splice(40, 0, '45,0,yes,no,2025-01,Birch,n1'); // log predictor not above 0
  out.splice(50, 0, 'abc,3,yes,no,2025-01,Birch,n1'); // non-numeric
  out.splice(60, 0, '45,3,yes,maybe,2025-01,Birch,n1'); // unknown outcome label
  out.splice(70, 0, '45,3,,no,2025-13,Birch,n1'); // missing predictor and an unreadable period
  out.splice(80, 0, '121,3,yes,no,2025-Q2,Cedar,n1'); // age out of range; a quarter period
  out.splice(90, 0, '90+,3,yes,no,2025,Cedar,n1'); // grouped age
  out.splice(100, 0, ''); // an empty line
  out.splice(110, 0, '45.5,2.25,yes,no,,Alder,n1'); // decimals, no period
  return out;
}

async function check(text: string) {
  const file = path.join(dir, `f${Math.random().toString(36).slice(2)}.csv`);
  writeFileSync(file, text);
  const copied: Buffer[] = [];
  const result = await checkUploadRows(
    {
      path: file,
      delimiter: ',',
      headers: HEADER,
      mapping,
      predictors,
      supplied: false,
      plannedVersionId: '0b7c5d0e-1f2a-4b3c-8d4e-5f6a7b8c9d0e',
      totalBytes: text.length,
    },
    { rows: (b) => void copied.push(b), progress: () => {} },
  );
  return { result, copied: Buffer.concat(copied) };
}

describe('row checks: a file with and without quotes gives the same result', () => {
  it('on every verdict, rejection, summary and stored byte', async () => {
    const body = rows();
    const plain = await check(`\uFEFF${HEADER.join(',')}\r\n${body.join('\r\n')}\r\n`);
    const quoted = await check(`\uFEFF${HEADER.map((h) => `"${h}"`).join(',')}\r\n${body.join('\r\n')}\r\n`);
    expect(plain.result.refusal).toBeNull();
    expect(plain.result.rowsRead).toBe(25_000 + 10); // the empty line is not a row
    expect(plain.result.rejectedRows).toBe(8);
    expect(plain.result.accepted + plain.result.rejectedRows).toBe(plain.result.rowsRead);
    // Line numbers count the header and the empty line: the formula row was inserted at index 30 → line 32.
    expect(plain.result.rejections).toContainEqual([32, 'age', '=1+2', 'the cell looks like a spreadsheet formula']);
    expect(plain.result.rejections.filter((r) => r[1] === '(row)')).toEqual([
      [12, '(row)', '', 'the row has 6 fields; the header has 7'],
      [22, '(row)', '', 'the row has 8 fields; the header has 7'],
    ]);
    expect(plain.result).toEqual(quoted.result);
    expect(plain.copied.equals(quoted.copied)).toBe(true);
    expect(plain.copied.length).toBeGreaterThan(100_000);
  });

  it('refuses the whole file on an identifier past the screened sample, on both paths', async () => {
    const body = rows();
    body.splice(20_000, 0, '45,3,yes,no,2025-01,Birch,(555) 201-4477');
    const mapped = { ...mapping, subgroups: { unit: 'unit', note: 'note' } };
    for (const header of [HEADER.join(','), HEADER.map((h) => `"${h}"`).join(',')]) {
      const file = path.join(dir, `id${Math.random().toString(36).slice(2)}.csv`);
      writeFileSync(file, `${header}\n${body.join('\n')}\n`);
      const res = await checkUploadRows(
        {
          path: file,
          delimiter: ',',
          headers: HEADER,
          mapping: mapped,
          predictors,
          supplied: false,
          plannedVersionId: '0b7c5d0e-1f2a-4b3c-8d4e-5f6a7b8c9d0e',
          totalBytes: 1,
        },
        { rows: () => {}, progress: () => {} },
      );
      expect(res.refusal?.column).toBe('note');
      expect(res.refusal?.category).toMatch(/telephone/);
    }
  });
});

describe('row checks: unusual cells give the same result with and without quotes', () => {
  const header = ['age', 'lab', 'flag', 'died', 'period', 'unit'];
  const unusual = {
    predictors: { age: 'age', lab: 'lab', flag: 'flag' },
    outcome: { column: 'died', positive: ['yes'], negative: ['no'] },
    date: { column: 'period' },
    subgroups: { unit: 'unit' },
    ranges: {},
  };
  const preds: CheckInput['predictors'] = [
    { column: 'age', kind: 'numeric', positiveOnly: false },
    { column: 'lab', kind: 'numeric', positiveOnly: false },
    { column: 'flag', kind: 'text', positiveOnly: false },
  ];
  const labs = [
    '-1.5',
    '007',
    '12345.678',
    '1e3',
    '0x10',
    '0b1',
    'Infinity',
    ' 4',
    '4 ',
    '5.',
    '.5',
    '1.000000000000001',
    '99999.5',
    '0',
    '-0',
    '3.25',
    '',
    'abc',
    '+2',
  ];
  const units = ['Ålesund', 'café', ' Birch', 'Birch', '', 'Cedar', 'Birch '];
  const flags = ['yes', 'Yes', 'no', ' no'];
  const periods = ['2025-01', '2025-Q3', '', '2025-13', '2025'];
  const ages = ['45', '89', '0', '121', '90+', '07', '-1'];
  const body: string[] = [];
  for (let i = 0; i < 12_000; i++) {
    // Mostly ordinary rows (so the byte path learns the labels), with the unusual cells mixed in.
    const odd = i % 7 === 0;
    const k = Math.floor(i / 7);
    body.push(
      [
        odd ? ages[k % ages.length] : String(20 + (i % 60)),
        odd ? labs[k % labs.length] : String(i % 50),
        flags[i % flags.length],
        i % 5 ? 'no' : 'yes',
        odd ? periods[k % periods.length] : '2025-02',
        units[i % units.length],
      ].join(','),
    );
  }

  async function run(text: Buffer) {
    const file = path.join(dir, `u${Math.random().toString(36).slice(2)}.csv`);
    writeFileSync(file, text);
    const copied: Buffer[] = [];
    const result = await checkUploadRows(
      {
        path: file,
        delimiter: ',',
        headers: header,
        mapping: unusual,
        predictors: preds,
        supplied: false,
        plannedVersionId: '0b7c5d0e-1f2a-4b3c-8d4e-5f6a7b8c9d0e',
        totalBytes: text.length,
      },
      { rows: (b) => void copied.push(b), progress: () => {} },
    );
    return { result, copied: Buffer.concat(copied) };
  }

  it('on signs, leading zeros, long and malformed numbers, padded and non-ASCII labels', async () => {
    const a = await run(Buffer.from(`${header.join(',')}\n${body.join('\n')}\n46,3,yes,no,2025,Cedar`));
    const b = await run(
      Buffer.from(`${header.map((h) => `"${h}"`).join(',')}\n${body.join('\n')}\n46,3,yes,no,2025,Cedar`),
    );
    expect(a.result.refusal).toBeNull();
    expect(a.result.rowsRead).toBe(12_001);
    expect(a.result.rejectedRows).toBeGreaterThan(100);
    expect(a.result.accepted).toBeGreaterThan(10_000);
    expect(a.result).toEqual(b.result);
    expect(a.copied.equals(b.copied)).toBe(true);
    // Only decimal notation is a number: hexadecimal, binary, exponent and Infinity are rejected.
    for (const odd of ['1e3', '0x10', '0b1', 'Infinity'])
      expect(
        a.result.rejections.some((r) => r[1] === 'lab' && r[2] === odd && /decimal number/.test(r[3])),
        odd,
      ).toBe(true);
  });

  it('refuses the file on a byte that is not UTF-8 or a NUL after the first rows, naming the line', async () => {
    const good = Buffer.from(`${header.join(',')}\n${body.join('\n')}\n`);
    for (const bad of [Buffer.from([0x34, 0x35, 0x2c, 0x42, 0xff, 0x0a]), Buffer.from('45,3,yes,no,2025,B\0ch\n')]) {
      await expect(run(Buffer.concat([good, bad]))).rejects.toThrow(/UTF-8|NUL/);
      await expect(run(Buffer.concat([good, bad]))).rejects.toThrow(/line 12002/);
    }
  });

  it('refuses an age over 89 at the same line on both paths, after many rows taken from the bytes', async () => {
    const rowsWithOld = body.filter((r) => !r.startsWith('90+') && !r.startsWith('121'));
    rowsWithOld.splice(9_000, 0, '95,3,yes,no,2025-02,Birch');
    const a = await run(Buffer.from(`${header.join(',')}\n${rowsWithOld.join('\n')}\n`));
    const b = await run(Buffer.from(`${header.map((h) => `"${h}"`).join(',')}\n${rowsWithOld.join('\n')}\n`));
    expect(a.result.refusal?.category).toBe('ages over 89');
    expect(a.result.refusal).toEqual(b.result.refusal);
    expect(a.result.rowsRead).toBe(b.result.rowsRead);
  });
});

describe('the screen sample is what the row checks read', () => {
  it('with a BOM, CRLF and LF lines, empty lines, ragged rows and non-ASCII text, with and without quotes', async () => {
    const { readHeaderAndSample } = await import('../../../server/src/domain/cohorts/csvFile');
    const body = rows();
    body.splice(5, 0, '', '46,2,no,no,2025-03,Ålesund ward,n2', '47,2,no');
    const expected = {
      headers: HEADER,
      sample: body
        .filter((l) => l !== '')
        .slice(0, 5000)
        .map((l) => l.split(',')),
    };
    for (const text of [
      `\uFEFF${HEADER.join(',')}\r\n${body.join('\r\n')}\r\n`,
      `${HEADER.join(';')}\n${body.map((l) => l.replace(/,/g, ';')).join('\n')}`,
      `${HEADER.map((h) => `"${h}"`).join(',')}\n${body.join('\n')}\n`,
    ]) {
      const file = path.join(dir, `s${Math.random().toString(36).slice(2)}.csv`);
      writeFileSync(file, text);
      const delimiter = text.startsWith('age;') ? ';' : ',';
      expect(await readHeaderAndSample(file, delimiter, 5000)).toEqual(expected);
    }
  });
});

describe('column summaries: the histogram of a large numeric column comes from a uniform sample', () => {
  it('Algorithm L (Li 1994) keeps each of 60,000 values with equal chance: a chi-square test on 20 bins passes', async () => {
    const header = ['age', 'lab', 'flag', 'died', 'period', 'unit'];
    const n = 60_000;
    // lab runs 0…59,999 in file order, so a sample biased to early or late rows would show as a slope.
    const lines = Array.from(
      { length: n },
      (_, i) => `${20 + (i % 60)},${i},yes,${i % 5 ? 'no' : 'yes'},2025-02,Birch`,
    );
    const file = path.join(dir, `hist${Math.random().toString(36).slice(2)}.csv`);
    writeFileSync(file, `${header.join(',')}\n${lines.join('\n')}\n`);
    const res = await checkUploadRows(
      {
        path: file,
        delimiter: ',',
        headers: header,
        mapping: {
          predictors: { age: 'age', lab: 'lab', flag: 'flag' },
          outcome: { column: 'died', positive: ['yes'], negative: ['no'] },
          date: null,
          subgroups: {},
          ranges: {},
        },
        predictors: [
          { column: 'age', kind: 'numeric', positiveOnly: false },
          { column: 'lab', kind: 'numeric', positiveOnly: false },
          { column: 'flag', kind: 'text', positiveOnly: false },
        ],
        supplied: false,
        plannedVersionId: '0b7c5d0e-1f2a-4b3c-8d4e-5f6a7b8c9d0e',
        totalBytes: 1,
      },
      { rows: () => {}, progress: () => {} },
    );
    const lab = res.columnSummary.lab as { kind: 'numeric'; histogram: { count: number }[]; histogramSampled: boolean };
    expect(lab.histogramSampled).toBe(true);
    expect(lab.histogram).toHaveLength(20);
    // Back to reservoir counts (5,000 values, 250 expected per bin); chi-square with 19 df, 0.1 % critical value 43.82
    // (common practice, no source; the critical value from a chi-square table, from memory).
    const sampled = lab.histogram.map((h) => (h.count * 5000) / n);
    const chi2 = sampled.reduce((acc, o) => acc + (o - 250) ** 2 / 250, 0);
    expect(chi2).toBeLessThan(43.82);
    expect(sampled.reduce((a, b) => a + b, 0)).toBeCloseTo(5000, -1);
  });
});

describe('line numbers count the lines a quoted field spans', () => {
  it('a rejection after a field with a line break names the physical line', async () => {
    const text = `${HEADER.join(',')}\n45,3,yes,no,2025-01,Birch,n1\n46,3,yes,no,2025-01,"Birch",n1\n47,3,yes,no,2025-01,Birch,"two\nlines"\n=1+2,3,yes,no,2025-01,Birch,n1\n`;
    const file = path.join(dir, `q${Math.random().toString(36).slice(2)}.csv`);
    writeFileSync(file, text);
    const res = await checkUploadRows(
      {
        path: file,
        delimiter: ',',
        headers: HEADER,
        mapping,
        predictors,
        supplied: false,
        plannedVersionId: '0b7c5d0e-1f2a-4b3c-8d4e-5f6a7b8c9d0e',
        totalBytes: text.length,
      },
      { rows: () => {}, progress: () => {} },
    );
    expect(res.rejections).toEqual([[6, 'age', '=1+2', 'the cell looks like a spreadsheet formula']]);
  });
});
