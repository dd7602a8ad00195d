// Prints the route table as the explicit access matrix kept in tests/helpers/accessMatrix.ts.
//   npx tsx server/scripts/print-access-matrix.ts            print it
//   npx tsx server/scripts/print-access-matrix.ts --write    rewrite tests/helpers/accessMatrix.ts from server/src/http/routes/table.ts
// Review the diff before committing: the matrix is the second opinion on who may call what.
import 'reflect-metadata';
import { writeFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { ROLE_SETS } from '@shared/access';
import type { Access } from '../src/http/routes/define';
import { routes } from '../src/http/routes/table';

const sameRoles = (a: readonly string[], b: readonly string[]) =>
  a.length === b.length && a.every((r) => b.includes(r));

/** The named set of shared/src/access.ts the route grants: the very object if the table names it, else the first with the same roles. */
function setName(a: Exclude<Access, string>): string {
  const entries = Object.entries(ROLE_SETS);
  const found = entries.find(([, set]) => set === a) ?? entries.find(([, set]) => sameRoles(set, a));
  if (!found) throw new Error(`no named role set in shared/src/access.ts holds exactly ${a.join(', ')}: add one`);
  return found[0];
}

export function renderAccessMatrix(): string {
  const lines = routes.map(
    (r) =>
      `  '${r.method.toUpperCase()} ${r.path}': ${typeof r.access === 'string' ? `'${r.access}'` : setName(r.access)},`,
  );
  const names = [...new Set(routes.flatMap((r) => (typeof r.access === 'string' ? [] : [setName(r.access)])))].sort();
  return `// Who may call each API route: 'public' (no token), 'signed-in' (any active account) or one of the named role sets
// of shared/src/access.ts (the sets the route table and the client's pages take theirs from).
// A second, hand-checked statement of which set each route in server/src/http/routes/table.ts grants:
// tests/api/accessControl.test.ts fails when a route has no entry here, when an entry has no route, or when the two
// disagree, and then calls every route as every role against the running app.
// Regenerate after adding routes: npx tsx server/scripts/print-access-matrix.ts --write  (then review the diff: where
// several sets hold the same roles it names the first; name the set that states the route's rule).
import type { Role } from '@shared/roles';
import { ${names.join(', ')} } from '@shared/access';

export type MatrixAccess = 'public' | 'signed-in' | readonly Role[];

export const accessMatrix: Record<string, MatrixAccess> = {
${lines.join('\n')}
};
`;
}

const isMain = process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1];
if (isMain) {
  const text = renderAccessMatrix();
  if (process.argv.includes('--write')) {
    const target = fileURLToPath(new URL('../../tests/helpers/accessMatrix.ts', import.meta.url));
    writeFileSync(target, text);
    console.log(`wrote ${routes.length} routes to ${target}`);
  } else process.stdout.write(text);
  process.exit(0);
}
