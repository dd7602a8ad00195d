import type { Role } from '@shared/roles';

/** Who acts: the signed-in account as checked on this request (http/middleware/auth.ts builds it). */
export interface AuthUser {
  id: string;
  email: string;
  name: string;
  role: Role;
}
