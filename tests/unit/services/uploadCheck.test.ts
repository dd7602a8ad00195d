// The row checks read a file without quotes by scanning lines (fast path) and any other file through csv-parse.
// Both must give the same verdicts, rejections, summaries and stored bytes for the same records: here one file is
// checked twice, once as written and once with its header cells quoted (which sends it through csv-parse).
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { checkUploadRows, type CheckInput } from '../../../server/src/services/uploadCheck';

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
    out.push([18 + (i % 70), 1 + (i % 20), i % 3 ? 'yes' : 'no', i % 9 ? 'no' : 'yes', `2025-${String(1 + (i % 12)).padStart(2, '0')}`, units[i % units.length], `n${i % 40}`].join(','));
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
    { path: file, delimiter: ',', headers: HEADER, mapping, predictors, supplied: false, plannedVersionId: '0b7c5d0e-1f2a-4b3c-8d4e-5f6a7b8c9d0e', totalBytes: text.length },
    { rows: (b) => void copied.push(b), progress: () => {} },
  );
  return { result, copied: Buffer.concat(copied) };
}

describe('row checks: the line-scanning path and the csv-parse path agree', () => {
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
    expect(plain.result.rejections.find((r) => r[1] === '(row)')?.[0]).toBe(12);
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
        { path: file, delimiter: ',', headers: HEADER, mapping: mapped, predictors, supplied: false, plannedVersionId: '0b7c5d0e-1f2a-4b3c-8d4e-5f6a7b8c9d0e', totalBytes: 1 },
        { rows: () => {}, progress: () => {} },
      );
      expect(res.refusal?.column).toBe('note');
      expect(res.refusal?.category).toMatch(/telephone/);
    }
  });
});
