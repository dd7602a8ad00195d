import type { PublicUser } from '@shared/auth';
import type { Role } from '@shared/roles';
import { http } from './http';

export interface NewAccount {
  email: string;
  name: string;
  role: Role;
  password: string;
}

export interface AccountChange {
  name?: string;
  role?: Role;
  active?: boolean;
}

export const listUsers = async () => (await http.get<{ users: PublicUser[] }>('/api/users')).users;

export const createUser = async (body: NewAccount) => (await http.post<{ user: PublicUser }>('/api/users', body)).user;

export const updateUser = async (id: string, change: AccountChange) =>
  (await http.patch<{ user: PublicUser }>(`/api/users/${encodeURIComponent(id)}`, change)).user;

export const resetPassword = (id: string, newPassword: string) =>
  http.post<void>(`/api/users/${encodeURIComponent(id)}/password`, { newPassword });
