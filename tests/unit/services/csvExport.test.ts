// CSV export: formula neutralisation (OWASP "CSV Injection") and RFC 4180 quoting, read back by an independent parser.
import Papa from 'papaparse';
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import {
  csvCellText,
  csvRecords,
  neutraliseFormula,
  toCsv,
  type CsvCell,
} from '../../../server/src/domain/cohorts/csvExport';

const csvCell = (v: CsvCell) => csvRecords([[v]]).replace(/\r\n$/, '');

describe('neutraliseFormula', () => {
  // The trigger characters are the ones OWASP lists for CSV injection: = + - @ tab CR.
  it.each([
    '=1+1',
    '+cmd',
    '-1+2',
    '@SUM(A1)',
    '\tx',
    '\rx',
    '=HYPERLINK("http://x","y")',
    "=cmd|' /C calc'!A0",
    ' =not first',
    '  +1+1',
  ])('prefixes %j with a quote', (text) => {
    expect(neutraliseFormula(text)).toBe(`'${text}`);
  });
  it.each(['plain', '', '1=1', "'already", 'a-b', 'Birch', '-3.6', '+1', '-0.5e2'])(
    'leaves %j alone (text, or a plain number)',
    (text) => {
      expect(neutraliseFormula(text)).toBe(text);
    },
  );
});

describe('csvCell', () => {
  it('keeps numbers numeric, including negative ones, and blanks non-finite and null', () => {
    expect(csvCell(-0.25)).toBe('-0.25');
    expect(csvCell(3)).toBe('3');
    expect(csvCell(Number.NaN)).toBe('');
    expect(csvCell(null)).toBe('');
    expect(csvCell(undefined)).toBe('');
    expect(csvCell(true)).toBe('true');
    expect(csvCellText(-0.25)).toBe('-0.25');
  });
  it('quotes commas, quotes and line breaks as RFC 4180 §2.6–2.7 says', () => {
    expect(csvCell('a,b')).toBe('"a,b"');
    expect(csvCell('say "hi"')).toBe('"say ""hi"""');
    expect(csvCell('two\nlines')).toBe('"two\nlines"');
    expect(csvCell('cr\r\nlf')).toBe('"cr\r\nlf"');
  });
  it('neutralises before quoting, so the quote is inside the field', () => {
    expect(csvCell('=1,2')).toBe(`"'=1,2"`);
    expect(csvCell('\r=x')).toBe(`"'\r=x"`);
  });
  it('writes dates as ISO 8601', () => {
    expect(csvCell(new Date('2025-01-02T03:04:05.000Z'))).toBe('2025-01-02T03:04:05.000Z');
  });
});

const hostile = [
  ['=1+1', '+SUM(A1:A9)', '-2+3', '@cmd'],
  ['\tTAB', '\rCR', 'a "quoted" word', 'comma, inside'],
  ['line\nbreak', 'crlf\r\nbreak', '', 'plain'],
];

describe('toCsv', () => {
  it('round-trips through papaparse (the one reader) with every dangerous cell neutralised', () => {
    const text = toCsv(['a', 'b', 'c', 'd'], hostile);
    expect(text.endsWith('\r\n')).toBe(true);
    const back = Papa.parse<string[]>(text, { skipEmptyLines: true }).data;
    expect(back[0]).toEqual(['a', 'b', 'c', 'd']);
    expect(back).toHaveLength(4);
    for (const [i, row] of hostile.entries()) {
      for (const [j, cell] of row.entries()) {
        const got = back[i + 1][j];
        expect(got.replace(/^'/, '')).toBe(cell);
        expect(/^[=+\-@\t\r]/.test(got), `cell ${i},${j} ${JSON.stringify(got)}`).toBe(false);
      }
    }
  });

  it("is read the same by Python's csv module (an outside RFC 4180 reader)", () => {
    const text = toCsv(['a', 'b', 'c', 'd'], hostile);
    const out = execFileSync(
      '/usr/bin/python3',
      ['-c', 'import csv,sys,json; print(json.dumps(list(csv.reader(sys.stdin.read().splitlines(True)))))'],
      {
        input: text,
      },
    ).toString();
    const rows = JSON.parse(out) as string[][];
    expect(rows).toHaveLength(4);
    expect(rows.slice(1).map((r) => r.map((c) => c.replace(/^'/, '')))).toEqual(hostile);
  });
});
