import { DEMO_PASSWORD } from '../../platform/config';
import type { Role } from '@shared/roles';
import { User } from '../../platform/database/entities/User';
import { hashPassword } from '../../domain/accounts/users';
import { dataSource } from '../../platform/database/dataSource';

// Invented people for the demo scenario; not real staff.
export const DEMO_ACCOUNTS: { email: string; name: string; role: Role }[] = [
  { email: 'admin@demo.test', name: 'Ada Okonkwo-Reyes', role: 'admin' },
  { email: 'steward@demo.test', name: 'Nell Varga', role: 'steward' },
  { email: 'statistician@demo.test', name: 'Dr. Tomas Ilunga', role: 'statistician' },
  { email: 'chair@demo.test', name: 'Dr. Imogen Hartwell', role: 'chair' },
  { email: 'clinician@demo.test', name: 'Dr. Ravi Castellanos', role: 'clinician' },
];

/** Creates the demo accounts that are missing; existing accounts are left as they are. */
export async function seedAccounts(): Promise<Record<Role, User>> {
  const repo = dataSource.getRepository(User);
  const out = {} as Record<Role, User>;
  for (const a of DEMO_ACCOUNTS) {
    let user = await repo.findOne({ where: { email: a.email } });
    if (!user) {
      user = repo.create({ ...a, passwordHash: await hashPassword(DEMO_PASSWORD) });
      await repo.save(user);
    }
    out[a.role] = user;
  }
  return out;
}
