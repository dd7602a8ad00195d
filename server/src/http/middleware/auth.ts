import { createSecretKey } from 'node:crypto';
import type { Request, RequestHandler } from 'express';
import jwt from 'jsonwebtoken';
import type { Role } from '@shared/roles';
import { config } from '../../platform/config';
import type { AuthUser } from '../../domain/accounts/actor';
import { accountForToken, type TokenClaims } from '../../domain/accounts/sessionToken';
import { HttpError } from './errors';

export type { AuthUser };

declare module 'express-serve-static-core' {
  interface Request {
    user?: AuthUser;
  }
}

// Made once: given a string, jsonwebtoken first tries it as a public key (createPublicKey throws) on every verify,
// which cost more CPU than the rest of a typical GET together. A secret KeyObject skips that.
const verifyKey = createSecretKey(Buffer.from(config.jwtSecret, 'utf8'));

const unauthorized = () => new HttpError(401, 'sign in required: the token is missing, invalid or expired');

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
    claims = jwt.verify(token, verifyKey, {
      algorithms: ['HS256'],
      maxAge: config.tokenLifetimeSeconds,
    }) as unknown as TokenClaims & { exp?: unknown; iat?: unknown; nbf?: unknown };
  } catch {
    throw unauthorized();
  }
  // Every token Plumbline signs has exp = iat + lifetime: one without exp, or valid for longer, was not made here.
  if (
    typeof claims.exp !== 'number' ||
    typeof claims.iat !== 'number' ||
    claims.exp - claims.iat > config.tokenLifetimeSeconds
  )
    throw unauthorized();
  if (claims.nbf === undefined) {
    verifiedTokens.set(token, { sub: claims.sub, role: claims.role, tv: claims.tv, exp: claims.exp });
    if (verifiedTokens.size > TOKEN_LIMIT) verifiedTokens.delete(verifiedTokens.keys().next().value as string);
  }
  return claims;
}

/** Verifies the bearer token (HS256 only) and that the account is still active with the same role. */
export async function authenticateRequest(req: Request): Promise<AuthUser> {
  const header = req.headers.authorization ?? '';
  const match = /^Bearer ([A-Za-z0-9_\-.]+)$/.exec(header);
  if (!match) throw unauthorized();
  const claims = verifiedClaims(match[1]);
  if (typeof claims.sub !== 'string' || !/^[0-9a-f-]{36}$/i.test(claims.sub)) throw unauthorized();
  const user = await accountForToken(claims.sub);
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
