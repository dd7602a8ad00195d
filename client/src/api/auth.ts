import type { LoginRequest, LoginResponse, PublicUser } from '@shared/auth';
import { http } from './http';

export const login = (body: LoginRequest) => http.post<LoginResponse>('/api/auth/login', body);

export const me = () => http.get<{ user: PublicUser }>('/api/auth/me');

/** Changing one's own password revokes older tokens; the answer carries a fresh one. */
export const changePassword = (body: { currentPassword: string; newPassword: string }) =>
  http.post<LoginResponse>('/api/auth/password', body);
