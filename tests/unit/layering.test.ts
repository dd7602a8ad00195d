// The server's folders and what each may import (DEVELOPERS.md, "Layout"; each folder's README.md says the same).
// Reads the import lines of every server file, resolves the relative ones, and fails on a folder importing one it
// may not: the table below is the rule.
import { readdirSync, readFileSync, statSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

const src = fileURLToPath(new URL('../../server/src', import.meta.url));

// Each top folder (or '.' for the entry files beside them) and the places it may import from, besides itself and
// @shared. A place is a folder or a single file, relative to server/src.
const ALLOWED: Record<string, string[]> = {
  stats: [],
  platform: [],
  domain: ['platform', 'stats', 'jobs/queue.ts', 'jobs/threads'],
  jobs: ['domain', 'platform', 'stats'],
  http: ['domain', 'jobs', 'platform', 'stats'],
  cli: ['domain', 'platform', 'stats'],
  demo: ['domain', 'jobs', 'platform', 'stats'],
  '.': ['http', 'domain', 'jobs', 'platform', 'stats', 'cli', 'demo'],
};
// Narrower rules inside a folder: route handlers and middleware reach the database only through domain code.
const FORBIDDEN_INSIDE: { from: string; to: string; why: string }[] = [
  { from: 'http', to: 'platform/database', why: 'routes call services and never run SQL' },
];

function walk(dir: string): string[] {
  return readdirSync(dir).flatMap((name) => {
    const p = path.join(dir, name);
    return statSync(p).isDirectory() ? walk(p) : /\.(ts|mjs)$/.test(name) ? [p] : [];
  });
}

/** Relative specifiers of static imports, re-exports and dynamic imports. */
export function importsOf(text: string): string[] {
  const out: string[] = [];
  for (const m of text.matchAll(/(?:^|\n)\s*(?:import|export)\b[^'"]*?from\s*['"]([^'"]+)['"]/g)) out.push(m[1]);
  for (const m of text.matchAll(/(?:^|\n)\s*import\s*['"]([^'"]+)['"]/g)) out.push(m[1]);
  for (const m of text.matchAll(/\bimport\(\s*['"]([^'"]+)['"]\s*\)/g)) out.push(m[1]);
  return out.filter((s) => s.startsWith('.'));
}

const topOf = (rel: string) => (rel.includes('/') ? rel.split('/')[0] : '.');
const within = (rel: string, place: string) =>
  rel === place || rel.startsWith(`${place}/`) || rel === place.replace(/\.ts$/, '');

// Files outside server/src that server code may read: the package's own version (route table, OpenAPI document).
const OUTSIDE_ALLOWED = ['../../package.json'];

/** What is wrong with one file's imports, `rel` being its path under server/src. */
function fileViolations(rel: string, text: string): string[] {
  const found: string[] = [];
  const top = topOf(rel);
  const allowed = ALLOWED[top];
  if (!allowed) return [`${rel}: folder "${top}" is not in the layering table`];
  for (const spec of importsOf(text)) {
    const target = path.posix.normalize(path.posix.join(path.posix.dirname(rel), spec));
    if (target.startsWith('..')) {
      if (!OUTSIDE_ALLOWED.includes(target)) found.push(`${rel} imports ${spec}, outside server/src`);
      continue;
    }
    const targetTop = topOf(target);
    if (targetTop !== top && !allowed.some((place) => within(target, place) || within(`${target}.ts`, place)))
      found.push(`${rel} imports ${target} (${top} may import ${allowed.join(', ') || 'only itself'})`);
    for (const rule of FORBIDDEN_INSIDE)
      if (top === rule.from && within(target, rule.to)) found.push(`${rel} imports ${target}: ${rule.why}`);
  }
  return found;
}

const serverFiles = () => walk(src).map((f) => path.relative(src, f).split(path.sep).join('/'));

describe('server layering', () => {
  it('reads the import lines it checks', () => {
    expect(
      importsOf(
        `import a from './a';\nimport type { B } from '../b';\nexport { c } from './c';\nimport './d';\nconst e = await import('../e');\nimport x from 'express';`,
      ),
    ).toEqual(['./a', '../b', './c', './d', '../e']);
  });

  it('reports the imports the table forbids', () => {
    expect(fileViolations('domain/runs/x.ts', `import { notFound } from '../../http/middleware/errors';`)).toHaveLength(
      1,
    );
    expect(
      fileViolations('platform/observability/x.ts', `import { queueDepth } from '../../jobs/queueDepth';`),
    ).toHaveLength(1);
    expect(fileViolations('domain/runs/x.ts', `import { task } from '../../jobs/background';`)).toHaveLength(1);
    expect(
      fileViolations('http/routes/x.ts', `import { dataSource } from '../../platform/database/dataSource';`),
    ).toEqual(['http/routes/x.ts imports platform/database/dataSource: routes call services and never run SQL']);
    expect(fileViolations('stats/x.ts', `const m = await import('../domain/runs/runs');`)).toHaveLength(1);
    expect(
      fileViolations(
        'domain/runs/x.ts',
        `import { enqueue } from '../../jobs/queue';\nimport { loadCohortData } from '../cohorts/cohortData';`,
      ),
    ).toEqual([]);
  });

  it('every server file imports only what its folder may', () => {
    expect(serverFiles().length).toBeGreaterThan(100);
    expect(serverFiles().flatMap((rel) => fileViolations(rel, readFileSync(path.join(src, rel), 'utf8')))).toEqual([]);
  });

  it('nothing outside http/ imports from http/', () => {
    const offenders = serverFiles()
      .filter((rel) => topOf(rel) !== 'http' && topOf(rel) !== '.')
      .filter((rel) =>
        importsOf(readFileSync(path.join(src, rel), 'utf8')).some((spec) =>
          path.posix.join(path.posix.dirname(rel), spec).startsWith('http/'),
        ),
      );
    expect(offenders).toEqual([]);
  });
});
