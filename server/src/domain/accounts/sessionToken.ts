// The session token's contents and its signing; http/middleware/auth.ts verifies it on each request and reads the
// account with accountForToken.
import jwt from 'jsonwebtoken';
import type { Role } from '@shared/roles';
import { config } from '../../platform/config';
import { dataSource } from '../../platform/database/dataSource';
import type { User } from '../../platform/database/entities/User';

export interface TokenClaims {
  sub: string;
  role: Role;
  tv: number;
}

export function signToken(user: Pick<User, 'id' | 'role' | 'tokenVersion'>): string {
  const claims: TokenClaims = { sub: user.id, role: user.role, tv: user.tokenVersion };
  return jwt.sign(claims, config.jwtSecret, { algorithm: 'HS256', expiresIn: config.tokenLifetimeSeconds });
}

export type AccountRow = {
  id: string;
  email: string;
  name: string;
  role: Role;
  active: boolean;
  token_version: number;
};

// The account row is read on every request (one indexed lookup), so a deactivation, role change or password change —
// made through any API process or straight in the database — is refused on the very next request.
export async function accountForToken(id: string): Promise<AccountRow | undefined> {
  // One plain parameterised query (the query builder cost more than the query itself).
  const rows: AccountRow[] = await dataSource.query(
    'SELECT id, email, name, role, active, token_version FROM users WHERE id = $1',
    [id],
  );
  return rows[0];
}
