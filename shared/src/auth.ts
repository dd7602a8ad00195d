import { z } from 'zod';
import { ROLES } from './roles';

export const PASSWORD_MIN_LENGTH = 12;

export const loginRequest = z.object({
  email: z.string().trim().toLowerCase().email('email must be an e-mail address').max(254),
  password: z.string().min(1, 'password is required').max(200),
});
export type LoginRequest = z.infer<typeof loginRequest>;

export const publicUser = z.object({
  id: z.string(),
  email: z.string(),
  name: z.string(),
  role: z.enum(ROLES),
  active: z.boolean().optional(),
});
export type PublicUser = z.infer<typeof publicUser>;

export interface LoginResponse {
  token: string;
  expiresInSeconds: number;
  user: PublicUser;
}

const password = z
  .string()
  .min(PASSWORD_MIN_LENGTH, `password must be at least ${PASSWORD_MIN_LENGTH} characters`)
  .max(200);

export const changePasswordRequest = z.object({
  currentPassword: z.string().min(1).max(200),
  newPassword: password,
});

export const createUserRequest = z.object({
  email: z.string().trim().toLowerCase().email().max(254),
  name: z.string().trim().min(1).max(120),
  role: z.enum(ROLES),
  password,
});

export const updateUserRequest = z
  .object({
    name: z.string().trim().min(1).max(120).optional(),
    role: z.enum(ROLES).optional(),
    active: z.boolean().optional(),
  })
  .refine((v) => Object.keys(v).length > 0, 'nothing to change');

export const resetPasswordRequest = z.object({ newPassword: password });

export const idParam = z.object({ id: z.string().uuid('id must be a UUID') });
