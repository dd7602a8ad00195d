// One formatter and one CSV writer: numbers and dates shown to people are written by shared/src/format.ts, and CSV by
// shared/src/csv.ts, on every page, in the server's texts and in the command line. A second copy shows up here.
import { readdirSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';

const root = path.resolve(__dirname, '../../..');
function sources(dir: string): string[] {
  return readdirSync(path.join(root, dir), { withFileTypes: true, recursive: true })
    .filter((e) => e.isFile() && /\.(ts|vue)$/.test(e.name))
    .map((e) => path.relative(root, path.join(e.parentPath, e.name)));
}
const files = [...sources('client/src'), ...sources('server/src'), ...sources('shared/src')];

/** Lines that format a number or date their own way; machine values (URL parameters) and the signer's local time are meant. */
const OWN_FORMATTING =
  /\.toFixed\(|\.toPrecision\(|\.toLocale(Date|Time)?String\(|Intl\.NumberFormat|Intl\.DateTimeFormat/;
const ALLOWED = [
  { file: 'shared/src/format.ts', why: 'the formatter itself' },
  {
    file: 'client/src/components/CohortAdequacyPanel.vue',
    line: /q\.(eventRate|auc) = /,
    why: 'numbers put into the planner link',
  },
  {
    file: 'client/src/components/SignatureManifest.vue',
    line: /dateStyle: 'medium', timeStyle: 'long'/,
    why: 'the signing time in the reader’s own zone, beside UTC',
  },
];

describe('one source', () => {
  it('numbers and dates for people are formatted by shared/src/format.ts only', () => {
    const found: string[] = [];
    for (const file of files) {
      readFileSync(path.join(root, file), 'utf8')
        .split('\n')
        .forEach((text, i) => {
          if (!OWN_FORMATTING.test(text)) return;
          if (ALLOWED.some((a) => a.file === file && (!a.line || a.line.test(text)))) return;
          found.push(`${file}:${i + 1}: ${text.trim()}`);
        });
    }
    expect(found).toEqual([]);
  });

  it('CSV is written by shared/src/csv.ts only (the one csv-stringify and the one formula neutraliser)', () => {
    const writers = files.filter(
      (f) =>
        f !== 'shared/src/csv.ts' &&
        /from 'csv-stringify|function (neutralise|neutralize|looksLikeFormula)/i.test(
          readFileSync(path.join(root, f), 'utf8'),
        ),
    );
    expect(writers).toEqual([]);
  });
});
