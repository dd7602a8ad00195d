// Prints the route table as the explicit access matrix kept in tests/helpers/accessMatrix.ts.
//   npx tsx server/scripts/print-access-matrix.ts            print it
//   npx tsx server/scripts/print-access-matrix.ts --write    rewrite tests/helpers/accessMatrix.ts from server/src/http/routes/table.ts
// Review the diff before committing: the matrix is the second opinion on who may call what.
import 'reflect-metadata';
import { writeFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { ROLES } from '@shared/roles';
import type { Access } from '../src/http/routes/define';
import { routes } from '../src/http/routes/table';

const fmt = (a: Access) => (typeof a === 'string' ? `'${a}'` : `[${ROLES.filter((r) => a.includes(r)).map((r) => `'${r}'`).join(', ')}]`);

export function renderAccessMatrix(): string {
  const lines = routes.map((r) => `  '${r.method.toUpperCase()} ${r.path}': ${fmt(r.access)},`);
  return `// Who may call each API route: 'public' (no token), 'signed-in' (any active account) or the roles allowed.
// A second, hand-checked copy of the access field in server/src/http/routes/table.ts: tests/api/accessControl.test.ts
// fails when a route has no entry here, when an entry has no route, or when the two disagree.
// Regenerate after adding routes: npx tsx server/scripts/print-access-matrix.ts --write  (then review the diff).
import type { Role } from '@shared/roles';

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
