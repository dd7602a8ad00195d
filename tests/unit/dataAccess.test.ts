// One typed way to read and write each table (DEVELOPERS.md, "Data access"): domain code goes through TypeORM's
// entities, repositories and query builder. A raw `.query(` is allowed only in the files below, each for its reason;
// a raw call anywhere else in server/src/domain fails, and so does an entry whose file no longer needs it.
import { readdirSync, readFileSync, statSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

const domain = fileURLToPath(new URL('../../server/src/domain', import.meta.url));

/** Files (under server/src/domain) that may run raw SQL, and why. Keep it short: move a plain read or write to its entity. */
export const RAW_SQL_ALLOWED: Record<string, string> = {
  'accounts/audit.ts': 'the audit chain: appended under an advisory lock, and its checkpoint check joins two tables',
  'accounts/auditNames.ts':
    "the audit page's target names: one joined lookup per kind of target (a run's via runJoin.ts)",
  'accounts/sessionToken.ts': 'the account check on every request: one indexed read, cheaper than the query builder',
  'accounts/users.ts': 'a password guess is counted (and the account locked) in one guarded UPDATE … RETURNING',
  'cohorts/cohortData.ts':
    'takes a `Query`: worker threads read row blocks through their own connection, no DataSource',
  'cohorts/cohorts.ts': 'joined read models: cohorts with their latest version, versions with their uploader',
  'cohorts/rejectedRows.ts': 'cohort_upload_rejections has no key (bulk rows of an upload check), so no entity',
  'cohorts/uploadRejections.ts': 'cohort_upload_rejections has no key (bulk rows of an upload check), so no entity',
  'cohorts/uploads.ts':
    'the upload lifecycle: leases (advisory locks), status changes guarded by the current status with their row count, staged row blocks, rejected rows',
  'cohorts/uploadSweep.ts': 'a discard guarded by the current status with its row count, and rejected rows',
  'comparisons/comparisons.ts':
    'the joined read model of score comparisons (both score versions, their scores and the cohort) and its filtered count',
  'comparisons/comparisonQueue.ts': 'the comparison lease (a session-level advisory lock on its own connection)',
  'comparisons/reviewReference.ts':
    'a guard that joins the named comparison with the run it must share patients and score with',
  'drift/alerts.ts': 'the joined read model of alerts (rule, score version, score, acknowledger)',
  'drift/timeline.ts': "the joined read models of a score version and its timeline's runs",
  'governance/governance.ts':
    'joined read models of runs, reviews, signatures and the sign-off queue; the guards that join reviews and signatures; the database clock',
  'reports/report.ts': "the joined read model of a run's report (runJoin.ts)",
  'reports/scorecards.ts': 'the joined read model of score cards (approved version, run, cohort, signature)',
  'runs/adequacy.ts': "a joined read of the runs comparable with a cohort version's",
  'runs/runQueue.ts':
    "the run lease (advisory lock), status changes guarded by the current status with their row count, and the `Query` handed to the drift series' thread-side code",
  'runs/runs.ts': 'joined read models of runs (runJoin.ts) and of the run form choices',
};

// `.query(`, `.query<Row>(`, also on a continued line (`\n  .query(`).
const RAW_CALL = /\.query\s*(?:<[^>()]*>)?\s*\(/g;

/** The raw SQL calls of one file, `rel` being its path under server/src/domain; empty when the file may make them. */
export function rawCallsOutsideAllowList(rel: string, text: string): string[] {
  if (RAW_SQL_ALLOWED[rel]) return [];
  return [...text.matchAll(RAW_CALL)].map((m) => `${rel}:${text.slice(0, m.index).split('\n').length}`);
}

function walk(dir: string): string[] {
  return readdirSync(dir).flatMap((name) => {
    const p = path.join(dir, name);
    return statSync(p).isDirectory() ? walk(p) : /\.ts$/.test(name) ? [p] : [];
  });
}

const domainFiles = () =>
  walk(domain).map((f) => ({
    rel: path.relative(domain, f).split(path.sep).join('/'),
    text: readFileSync(f, 'utf8'),
  }));

describe('data access in server/src/domain', () => {
  it('finds a raw call, in its forms, outside the allow-list', () => {
    const made = [
      `const rows = await dataSource.query('SELECT id FROM scores WHERE id = $1', [id]);`,
      `const rows = await m.query<{ id: string }[]>('SELECT id FROM scores');`,
      `await dataSource\n    .query('UPDATE scores SET name = $1', [name]);`,
    ].join('\n');
    expect(rawCallsOutsideAllowList('scores/invented.ts', made)).toEqual([
      'scores/invented.ts:1',
      'scores/invented.ts:2',
      'scores/invented.ts:4',
    ]);
    expect(rawCallsOutsideAllowList('runs/runQueue.ts', made)).toEqual([]);
    expect(rawCallsOutsideAllowList('scores/invented.ts', `await repo.createQueryBuilder('s').getRawMany();`)).toEqual(
      [],
    );
  });

  it('has no raw SQL call outside the allow-list', () => {
    const files = domainFiles();
    expect(files.length).toBeGreaterThan(40);
    expect(files.flatMap(({ rel, text }) => rawCallsOutsideAllowList(rel, text))).toEqual([]);
  });

  it('lists only files that exist and still make a raw call, each with its reason', () => {
    const byPath = new Map(domainFiles().map((f) => [f.rel, f.text]));
    const stale = Object.keys(RAW_SQL_ALLOWED).filter((rel) => !(byPath.get(rel) ?? '').match(RAW_CALL));
    expect(stale).toEqual([]);
    for (const reason of Object.values(RAW_SQL_ALLOWED)) expect(reason.length).toBeGreaterThan(20);
  });
});
