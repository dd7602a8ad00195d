// Prints the API route table (server/src/routes/table.ts) as Markdown for the README's "API" section.
//   npx tsx scripts/print-api-table.ts
import 'reflect-metadata';
import type { Access } from '../src/routes/define';
import { routes } from '../src/routes/table';

const who = (a: Access) => (a === 'public' ? 'anyone' : a === 'signed-in' ? 'any signed-in account' : a.join(', '));
const rows = routes.map((r) => `| ${r.method.toUpperCase()} | \`${r.path}\` | ${who(r.access)} | ${r.summary} |`);
process.stdout.write(`| method | path | who may call it | what it does |\n| --- | --- | --- | --- |\n${rows.join('\n')}\n`);
process.exit(0);
