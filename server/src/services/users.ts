import bcrypt from 'bcryptjs';
import type { PublicUser } from '@shared/auth';
import type { Role } from '@shared/roles';
import { config } from '../config';
import { dataSource } from '../db/dataSource';
import { User } from '../entities/User';
import { conflict, HttpError, notFound } from '../middleware/errors';
import type { AuthUser } from '../middleware/auth';
import { signToken } from '../middleware/auth';
import { appendAudit } from './audit';

const repo = () => dataSource.getRepository(User);

export const toPublicUser = (u: User): PublicUser => ({ id: u.id, email: u.email, name: u.name, role: u.role, active: u.active });

const GENERIC_LOGIN_FAILURE = 'e-mail or password is not correct';
// Computed once so an unknown e-mail costs the same bcrypt time as a wrong password.
const DUMMY_HASH = bcrypt.hashSync('plumbline-no-such-account', 10);

export async function login(email: string, password: string, ip: string) {
  const user = await repo()
    .createQueryBuilder('u')
    .addSelect('u.passwordHash')
    .where('u.email = :email', { email })
    .getOne();
  const ok = await bcrypt.compare(password, user?.passwordHash ?? DUMMY_HASH);
  if (!user || !user.active) {
    await appendAudit({ actorEmail: email, action: 'auth.login_failed', sourceIp: ip, details: { reason: user ? 'inactive' : 'unknown account' } });
    throw new HttpError(401, GENERIC_LOGIN_FAILURE);
  }
  if (user.lockedUntil && user.lockedUntil > new Date()) {
    await appendAudit({ actorId: user.id, actorEmail: email, action: 'auth.login_locked', sourceIp: ip });
    throw new HttpError(429, `too many failed sign-ins for this account; try again after ${user.lockedUntil.toISOString()}`);
  }
  if (!ok) {
    const failures = user.failedLogins + 1;
    const lock = failures >= config.loginRateLimit.maxFailuresPerAccount;
    await repo().update(user.id, {
      failedLogins: lock ? 0 : failures,
      lockedUntil: lock ? new Date(Date.now() + config.loginRateLimit.windowMs) : null,
    });
    await appendAudit({
      actorId: user.id,
      actorEmail: email,
      action: lock ? 'auth.account_locked' : 'auth.login_failed',
      sourceIp: ip,
      details: { reason: 'wrong password', failures },
    });
    throw new HttpError(401, GENERIC_LOGIN_FAILURE);
  }
  await repo().update(user.id, { failedLogins: 0, lockedUntil: null });
  await appendAudit({ actorId: user.id, actorEmail: email, action: 'auth.login', sourceIp: ip });
  return { token: signToken(user), expiresInSeconds: config.tokenLifetimeSeconds, user: toPublicUser(user) };
}

/** Checks a password again for an act that needs it (21 CFR 11.200: sign with ID and password). */
export async function checkPassword(userId: string, password: string): Promise<boolean> {
  const user = await repo().createQueryBuilder('u').addSelect('u.passwordHash').where('u.id = :id', { id: userId }).getOne();
  return !!user && user.active && (await bcrypt.compare(password, user.passwordHash));
}

export const hashPassword = (password: string) => bcrypt.hash(password, config.bcryptCost);

export async function listUsers(): Promise<PublicUser[]> {
  return (await repo().find({ order: { email: 'ASC' } })).map(toPublicUser);
}

export async function getUser(id: string): Promise<User> {
  const user = await repo().findOne({ where: { id } });
  if (!user) throw notFound('user');
  return user;
}

export async function createUser(actor: AuthUser, input: { email: string; name: string; role: Role; password: string }, ip: string) {
  if (await repo().findOne({ where: { email: input.email } })) throw conflict('an account with this e-mail already exists');
  return dataSource.transaction(async (m) => {
    const user = m.create(User, { email: input.email, name: input.name, role: input.role, passwordHash: await hashPassword(input.password) });
    await m.save(user);
    await appendAudit(
      { actorId: actor.id, actorEmail: actor.email, action: 'user.create', targetType: 'user', targetId: user.id, sourceIp: ip, details: { email: user.email, role: user.role } },
      m,
    );
    return toPublicUser(user);
  });
}

export async function updateUser(actor: AuthUser, id: string, change: { name?: string; role?: Role; active?: boolean }, ip: string) {
  const user = await getUser(id);
  if (actor.id === id && (change.active === false || (change.role && change.role !== 'admin'))) {
    throw conflict('you cannot deactivate yourself or remove your own admin role');
  }
  const before = { name: user.name, role: user.role, active: user.active };
  const revokes = (change.role !== undefined && change.role !== user.role) || (change.active === false && user.active);
  Object.assign(user, change);
  if (revokes) user.tokenVersion += 1;
  return dataSource.transaction(async (m) => {
    await m.save(user);
    await appendAudit(
      { actorId: actor.id, actorEmail: actor.email, action: 'user.update', targetType: 'user', targetId: id, sourceIp: ip, details: { before, after: change } },
      m,
    );
    return toPublicUser(user);
  });
}

export async function resetPassword(actor: AuthUser, id: string, newPassword: string, ip: string) {
  const user = await getUser(id);
  user.passwordHash = await hashPassword(newPassword);
  user.tokenVersion += 1;
  user.failedLogins = 0;
  user.lockedUntil = null;
  await dataSource.transaction(async (m) => {
    await m.save(user);
    await appendAudit({ actorId: actor.id, actorEmail: actor.email, action: 'user.reset_password', targetType: 'user', targetId: id, sourceIp: ip }, m);
  });
}

export async function changeOwnPassword(actor: AuthUser, currentPassword: string, newPassword: string, ip: string) {
  if (!(await checkPassword(actor.id, currentPassword))) throw new HttpError(403, 'the current password is not correct');
  const user = await getUser(actor.id);
  user.passwordHash = await hashPassword(newPassword);
  user.tokenVersion += 1;
  await dataSource.transaction(async (m) => {
    await m.save(user);
    await appendAudit({ actorId: actor.id, actorEmail: actor.email, action: 'user.change_password', targetType: 'user', targetId: actor.id, sourceIp: ip }, m);
  });
  return { token: signToken(user), expiresInSeconds: config.tokenLifetimeSeconds, user: toPublicUser(user) };
}
