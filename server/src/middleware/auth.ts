import { createSecretKey } from 'node:crypto';
import type { Request, RequestHandler } from 'express';
import jwt from 'jsonwebtoken';
import type { Role } from '@shared/roles';
import { config } from '../config';
import { dataSource } from '../db/dataSource';
import type { User } from '../entities/User';
import { HttpError } from './errors';

export interface AuthUser {
  id: string;
  email: string;
  name: string;
  role: Role;
}

declare module 'express-serve-static-core' {
  interface Request {
    user?: AuthUser;
  }
}

interface TokenClaims {
  sub: string;
  role: Role;
  tv: number;
}

export function signToken(user: Pick<User, 'id' | 'role' | 'tokenVersion'>): string {
  const claims: TokenClaims = { sub: user.id, role: user.role, tv: user.tokenVersion };
  return jwt.sign(claims, config.jwtSecret, { algorithm: 'HS256', expiresIn: config.tokenLifetimeSeconds });
}

// Made once: given a string, jsonwebtoken first tries it as a public key (createPublicKey throws) on every verify,
// which cost more CPU than the rest of a typical GET together. A secret KeyObject skips that.
const verifyKey = createSecretKey(Buffer.from(config.jwtSecret, 'utf8'));

const unauthorized = () => new HttpError(401, 'sign in required: the token is missing, invalid or expired');

/** Verifies the bearer token (HS256 only) and that the account is still active with the same role. */
export async function authenticateRequest(req: Request): Promise<AuthUser> {
  const header = req.headers.authorization ?? '';
  const match = /^Bearer ([A-Za-z0-9_\-.]+)$/.exec(header);
  if (!match) throw unauthorized();
  let claims: TokenClaims;
  try {
    claims = jwt.verify(match[1], verifyKey, { algorithms: ['HS256'] }) as unknown as TokenClaims;
  } catch {
    throw unauthorized();
  }
  if (typeof claims.sub !== 'string' || !/^[0-9a-f-]{36}$/i.test(claims.sub)) throw unauthorized();
  // One plain parameterised query (every request pays it; the query builder cost more than the query itself).
  const rows: { id: string; email: string; name: string; role: Role; active: boolean; token_version: number }[] = await dataSource.query(
    'SELECT id, email, name, role, active, token_version FROM users WHERE id = $1',
    [claims.sub],
  );
  const user = rows[0];
  if (!user || !user.active || user.token_version !== claims.tv || user.role !== claims.role) throw unauthorized();
  return { id: user.id, email: user.email, name: user.name, role: user.role };
}

export const authenticate: RequestHandler = async (req, _res, next) => {
  req.user = await authenticateRequest(req);
  next();
};

export function requireRole(roles: readonly Role[]): RequestHandler {
  return (req, _res, next) => {
    if (!req.user) throw unauthorized();
    if (!roles.includes(req.user.role)) throw new HttpError(403, `this needs one of the roles: ${roles.join(', ')}`);
    next();
  };
}

export function currentUser(req: Request): AuthUser {
  if (!req.user) throw unauthorized();
  return req.user;
}

export function sourceIp(req: Request): string {
  return req.ip ?? req.socket.remoteAddress ?? 'unknown';
}
