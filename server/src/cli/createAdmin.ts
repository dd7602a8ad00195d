// Creates an admin account on the configured database (the first one, or another):
//   PLUMBLINE_ADMIN_PASSWORD=… npm run admin:create -- --email you@hospital.example --name "Your Name"
//   printf '%s\n' "$PASSWORD" | npm run admin:create -- --email … --name …
// The password comes from PLUMBLINE_ADMIN_PASSWORD or the first line of standard input, never from an argument (which
// every user of the machine can read in the process list and which lands in shell history).
import 'reflect-metadata';
import { parseArgs } from 'node:util';
import { createUserRequest } from '@shared/auth';
import { config, DEMO_PASSWORD } from '../platform/config';
import { closeDatabase, dataSource, initDatabase } from '../platform/database/dataSource';
import { User } from '../platform/database/entities/User';
import { appendAudit } from '../domain/accounts/audit';
import { hashPassword } from '../domain/accounts/users';

const USAGE =
  'usage: admin:create --email ADDRESS --name "FULL NAME"   (password from PLUMBLINE_ADMIN_PASSWORD or the first line of stdin)';

async function readStdinLine(): Promise<string> {
  if (process.stdin.isTTY)
    process.stderr.write('Password (input is shown; prefer PLUMBLINE_ADMIN_PASSWORD or a pipe): ');
  let text = '';
  for await (const chunk of process.stdin) {
    text += chunk;
    if (text.includes('\n')) break;
  }
  return text.split(/\r?\n/)[0];
}

async function main(): Promise<number> {
  let args;
  try {
    args = parseArgs({ options: { email: { type: 'string' }, name: { type: 'string' } }, strict: true }).values;
  } catch (e) {
    console.error(`${(e as Error).message}\n${USAGE}`);
    return 2;
  }
  if (!args.email || !args.name) {
    console.error(USAGE);
    return 2;
  }
  const password = config.adminPassword ?? (await readStdinLine());
  const parsed = createUserRequest.safeParse({ email: args.email, name: args.name, role: 'admin', password });
  if (!parsed.success) {
    console.error(parsed.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('\n'));
    return 2;
  }
  const input = parsed.data;
  if (input.email.endsWith('@demo.test') || input.password === DEMO_PASSWORD) {
    console.error('refused: demo e-mail addresses and the demo password are for the demo only');
    return 2;
  }
  await initDatabase(true);
  try {
    if (await dataSource.getRepository(User).findOne({ where: { email: input.email } })) {
      console.error(`an account with the e-mail ${input.email} already exists`);
      return 1;
    }
    const user = await dataSource.transaction(async (m) => {
      const u = m.create(User, {
        email: input.email,
        name: input.name,
        role: 'admin',
        passwordHash: await hashPassword(input.password),
      });
      await m.save(u);
      await appendAudit(
        {
          action: 'user.create',
          targetType: 'user',
          targetId: u.id,
          sourceIp: 'command line',
          details: { email: u.email, role: u.role },
        },
        m,
      );
      return u;
    });
    console.log(`admin account created: ${user.email}`);
    return 0;
  } finally {
    await closeDatabase();
  }
}

main().then(
  (code) => process.exit(code),
  (err) => {
    console.error('admin:create failed:', err instanceof Error ? err.message : err);
    process.exit(1);
  },
);
