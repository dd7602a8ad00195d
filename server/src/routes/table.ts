// The whole API at a glance: every route, who may call it, and the schema its input must match.
// tests/api/accessControl.test.ts walks this table; a route missing here is not mounted at all.
import { rateLimit } from 'express-rate-limit';
import { auditQuery } from '@shared/audit';
import { changePasswordRequest, createUserRequest, idParam, loginRequest, resetPasswordRequest, updateUserRequest } from '@shared/auth';
import { config } from '../config';
import * as audit from './audit';
import * as auth from './auth';
import type { RouteDef } from './define';
import * as health from './health';
import * as users from './users';

const ADMIN = ['admin'] as const;

// Per-IP limit on failed sign-ins; the per-account lock-out lives in services/users.ts.
const loginLimiter = rateLimit({
  windowMs: config.loginRateLimit.windowMs,
  limit: config.loginRateLimit.maxPerIp,
  skipSuccessfulRequests: true,
  standardHeaders: 'draft-7',
  legacyHeaders: false,
  message: { error: 'too many failed sign-ins from this address; wait and try again' },
});

export const routes: RouteDef[] = [
  { method: 'get', path: '/api/health', access: 'public', summary: 'service and database status', handler: health.health },

  { method: 'post', path: '/api/auth/login', access: 'public', summary: 'sign in', body: loginRequest, before: [loginLimiter], handler: auth.login },
  { method: 'get', path: '/api/auth/me', access: 'signed-in', summary: 'the signed-in account', handler: auth.me },
  { method: 'post', path: '/api/auth/password', access: 'signed-in', summary: 'change own password', body: changePasswordRequest, handler: auth.changePassword },

  { method: 'get', path: '/api/users', access: ADMIN, summary: 'list accounts', handler: users.list },
  { method: 'post', path: '/api/users', access: ADMIN, summary: 'create an account', body: createUserRequest, handler: users.create },
  { method: 'patch', path: '/api/users/:id', access: ADMIN, summary: 'change name, role or active flag', params: idParam, body: updateUserRequest, handler: users.update },
  { method: 'post', path: '/api/users/:id/password', access: ADMIN, summary: 'reset a password', params: idParam, body: resetPasswordRequest, handler: users.resetPassword },

  { method: 'get', path: '/api/audit', access: ADMIN, summary: 'list and filter the audit trail', query: auditQuery, handler: audit.list },
  { method: 'get', path: '/api/audit/verify', access: ADMIN, summary: 'check the audit hash chain', handler: audit.verify },
];
