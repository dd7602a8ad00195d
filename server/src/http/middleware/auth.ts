import { createSecretKey } from 'node:crypto';
import type { Request, RequestHandler } from 'express';
import jwt from 'jsonwebtoken';
import type { Role } from '@shared/roles';
import { config } from '../../platform/config';
import { dataSource } from '../../platform/database/dataSource';
import type { User } from '../../platform/database/entities/User';
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

type AccountRow = { id: string; email: string; name: string; role: Role; active: boolean; token_version: number };

// Tokens whose signature was checked: the same string always verifies the same way under the one secret, so only the
// time limit is checked again on each use (as jsonwebtoken does: valid while floor(now in s) < exp). Tokens with a
// not-before claim, and tokens that failed, are not kept. Bounded; the oldest dropped first.
const TOKEN_LIMIT = 5_000;
const verifiedTokens = new Map<string, TokenClaims & { exp: number }>();

function verifiedClaims(token: string): TokenClaims {
  const kept = verifiedTokens.get(token);
  if (kept) {
    if (Math.floor(Date.now() / 1000) < kept.exp) return kept;
    verifiedTokens.delete(token);
    throw unauthorized();
  }
  let claims: TokenClaims & { exp?: unknown; iat?: unknown; nbf?: unknown };
  try {
    // maxAge makes jsonwebtoken refuse a token without `iat` or older than the lifetime; `exp` is required below.
    claims = jwt.verify(token, verifyKey, { algorithms: ['HS256'], maxAge: config.tokenLifetimeSeconds }) as unknown as TokenClaims & { exp?: unknown; iat?: unknown; nbf?: unknown };
  } catch {
    throw unauthorized();
  }
  // Every token Plumbline signs has exp = iat + lifetime: one without exp, or valid for longer, was not made here.
  if (typeof claims.exp !== 'number' || typeof claims.iat !== 'number' || claims.exp - claims.iat > config.tokenLifetimeSeconds) throw unauthorized();
  if (claims.nbf === undefined) {
    verifiedTokens.set(token, { sub: claims.sub, role: claims.role, tv: claims.tv, exp: claims.exp });
    if (verifiedTokens.size > TOKEN_LIMIT) verifiedTokens.delete(verifiedTokens.keys().next().value as string);
  }
  return claims;
}

// The account row is read on every request (one indexed lookup), so a deactivation, role change or password change —
// made through any API process or straight in the database — is refused on the very next request.
async function accountRow(id: string): Promise<AccountRow | undefined> {
  // One plain parameterised query (the query builder cost more than the query itself).
  const rows: AccountRow[] = await dataSource.query('SELECT id, email, name, role, active, token_version FROM users WHERE id = $1', [id]);
  return rows[0];
}

/** Verifies the bearer token (HS256 only) and that the account is still active with the same role. */
export async function authenticateRequest(req: Request): Promise<AuthUser> {
  const header = req.headers.authorization ?? '';
  const match = /^Bearer ([A-Za-z0-9_\-.]+)$/.exec(header);
  if (!match) throw unauthorized();
  const claims = verifiedClaims(match[1]);
  if (typeof claims.sub !== 'string' || !/^[0-9a-f-]{36}$/i.test(claims.sub)) throw unauthorized();
  const user = await accountRow(claims.sub);
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
