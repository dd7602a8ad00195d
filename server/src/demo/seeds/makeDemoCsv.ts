// Writes tests/fixtures/kestrel-2026q1.csv: a ninth invented quarter (2026-Q1, 500 rows) with a few bad rows
// for the browser upload test; and tests/fixtures/kestrel-gaps-2026q2.csv: an invented quarter whose Charlson index and
// prior admissions have gaps (seeds/gapsCohort.ts), for a steward to upload with those columns allowed to have gaps.
// Run: npx tsx server/src/demo/seeds/makeDemoCsv.ts
import { writeFileSync } from 'node:fs';
import { kestrelQuarterCsv } from './kestrelData';
import { kestrelGapsCsv } from './gapsCohort';

export function demoCsv2026Q1(): string {
  const lines = [...kestrelQuarterCsv({ year: 2026, quarter: 1, index: 8, n: 500, seed: 2026 })];
  // Bad rows the steward must see (line numbers count the header as line 1).
  const bad = (i: number, col: number, value: string) => {
    const cells = lines[i].split(',');
    cells[col] = value;
    lines[i] = cells.join(',');
  };
  bad(12, 5, 'maybe'); // outcome not a known label
  bad(40, 0, '130'); // age outside 0–120
  bad(77, 1, ''); // missing length of stay
  bad(150, 5, 'maybe');
  bad(311, 1, '');
  return `${lines.join('\n')}\n`;
}

export function demoGapsCsv2026Q2(): string {
  return `${[...kestrelGapsCsv({ year: 2026, quarter: 2, index: 9, n: 600, seed: 2027 })].join('\n')}\n`;
}

const isMain = process.argv[1]?.endsWith('makeDemoCsv.ts');
if (isMain) {
  writeFileSync('tests/fixtures/kestrel-2026q1.csv', demoCsv2026Q1());
  writeFileSync('tests/fixtures/kestrel-gaps-2026q2.csv', demoGapsCsv2026Q2());
  console.log('wrote tests/fixtures/kestrel-2026q1.csv and tests/fixtures/kestrel-gaps-2026q2.csv');
}
