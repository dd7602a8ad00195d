import bcrypt from 'bcryptjs';
import type { PublicUser } from '@shared/auth';
import type { Role } from '@shared/roles';
import { config } from '../../platform/config';
import { dataSource } from '../../platform/database/dataSource';
import { User } from '../../platform/database/entities/User';
import { conflict, DomainError, forbidden, notFound } from '../errors';
import type { AuthUser } from './actor';
import { signToken } from './sessionToken';
import { appendAudit } from './audit';

const repo = () => dataSource.getRepository(User);

export const toPublicUser = (u: User): PublicUser => ({
  id: u.id,
  email: u.email,
  name: u.name,
  role: u.role,
  active: u.active,
});

// One answer for a wrong password, an unknown or inactive e-mail and a locked account, so no answer tells which
// accounts exist or are locked (the audit trail records the real reason).
export const GENERIC_LOGIN_FAILURE =
  'e-mail or password is not correct, or the account is locked for a while after too many failed sign-ins';
// Computed once so an unknown e-mail or a locked account costs the same bcrypt time as a wrong password.
const DUMMY_HASH = bcrypt.hashSync('plumbline-no-such-account', 10);

type Reserved = { id: string; email: string; password_hash: string; failures: number; locks: boolean };

/**
 * Takes one password guess from an account's allowance, atomically: a single UPDATE counts the try before the
 * password is compared, and the try that reaches the limit locks the account at once. So parallel tries can make at
 * most PLUMBLINE_LOGIN_MAX_FAILURES guesses; none is made while the account is locked, inactive or unknown (undefined).
 */
async function reserveGuess(where: 'email' | 'id', value: string): Promise<Reserved | undefined> {
  const max = config.loginRateLimit.maxFailuresPerAccount;
  const rows: [Reserved[], number] = await dataSource.query(
    `UPDATE users SET
       failed_logins = CASE WHEN failed_logins + 1 >= $2 THEN 0 ELSE failed_logins + 1 END,
       locked_until = CASE WHEN failed_logins + 1 >= $2 THEN now() + make_interval(secs => $3::double precision / 1000) ELSE NULL END
     WHERE ${where === 'email' ? 'email' : 'id'} = $1 AND active AND (locked_until IS NULL OR locked_until <= now())
     RETURNING id, email, password_hash, CASE WHEN locked_until IS NULL THEN failed_logins ELSE $2 END AS failures, locked_until IS NOT NULL AS locks`,
    [value, max, config.loginRateLimit.windowMs],
  );
  return rows[0][0];
}

/**
 * A right password: the account's count of failed tries starts again (and a lock taken by this very try ends). A
 * sign-in is no change of the account, so updated_at stays (TypeORM would set it to now otherwise).
 */
const clearFailures = (id: string) =>
  repo().update(id, { failedLogins: 0, lockedUntil: null, updatedAt: () => 'updated_at' });

export async function login(email: string, password: string, ip: string) {
  const reserved = await reserveGuess('email', email);
  const ok = await bcrypt.compare(password, reserved?.password_hash ?? DUMMY_HASH);
  if (!reserved) {
    // The lock is judged by the database's clock, as reserveGuess judged it.
    const user: { id: string; active: boolean; locked: boolean } | undefined = await repo()
      .createQueryBuilder('u')
      .select('u.id', 'id')
      .addSelect('u.active', 'active')
      .addSelect('u.locked_until > now()', 'locked')
      .where('u.email = :email', { email })
      .getRawOne();
    const reason = !user ? 'unknown account' : !user.active ? 'inactive' : 'locked';
    await appendAudit({
      actorId: user?.id ?? null,
      actorEmail: email,
      action: reason === 'locked' ? 'auth.login_locked' : 'auth.login_failed',
      sourceIp: ip,
      details: reason === 'locked' ? {} : { reason },
    });
    throw new DomainError('not-signed-in', GENERIC_LOGIN_FAILURE);
  }
  if (!ok) {
    await appendAudit({
      actorId: reserved.id,
      actorEmail: email,
      action: reserved.locks ? 'auth.account_locked' : 'auth.login_failed',
      sourceIp: ip,
      details: { reason: 'wrong password', failures: reserved.failures },
    });
    throw new DomainError('not-signed-in', GENERIC_LOGIN_FAILURE);
  }
  await clearFailures(reserved.id);
  const user = await getUser(reserved.id);
  await appendAudit({ actorId: user.id, actorEmail: email, action: 'auth.login', sourceIp: ip });
  return { token: signToken(user), expiresInSeconds: config.tokenLifetimeSeconds, user: toPublicUser(user) };
}

/**
 * Checks a password re-entered for an act that needs it (21 CFR 11.200: sign with ID and password). Each try counts
 * against the same allowance as sign-in (reserveGuess), so a stolen session cannot guess the password either, and a
 * failure is audited as `<act>.password_failed` (e.g. signature, user.change_password). Throws on failure.
 */
export async function verifyPasswordFor(
  actor: AuthUser,
  password: string,
  act: { action: string; targetType: string; targetId: string; ip: string; details?: Record<string, unknown> },
  wrong: string,
): Promise<void> {
  const reserved = await reserveGuess('id', actor.id);
  const ok = await bcrypt.compare(password, reserved?.password_hash ?? DUMMY_HASH);
  if (reserved && ok) {
    await clearFailures(reserved.id);
    return;
  }
  const audit = {
    actorId: actor.id,
    actorEmail: actor.email,
    targetType: act.targetType,
    targetId: act.targetId,
    sourceIp: act.ip,
  };
  if (!reserved) {
    await appendAudit({ ...audit, action: `${act.action}.password_locked`, details: { ...act.details } });
    throw new DomainError(
      'too-many-tries',
      'too many wrong passwords: the account is locked for a while; nothing was recorded',
    );
  }
  await appendAudit({
    ...audit,
    action: `${act.action}.password_failed`,
    details: { ...act.details, failures: reserved.failures },
  });
  if (reserved.locks)
    await appendAudit({
      ...audit,
      action: 'auth.account_locked',
      details: { reason: `wrong password re-entered (${act.action})`, failures: reserved.failures },
    });
  throw forbidden(wrong);
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

export async function createUser(
  actor: AuthUser,
  input: { email: string; name: string; role: Role; password: string },
  ip: string,
) {
  if (await repo().findOne({ where: { email: input.email } }))
    throw conflict('an account with this e-mail already exists');
  return dataSource.transaction(async (m) => {
    const user = m.create(User, {
      email: input.email,
      name: input.name,
      role: input.role,
      passwordHash: await hashPassword(input.password),
    });
    await m.save(user);
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'user.create',
        targetType: 'user',
        targetId: user.id,
        sourceIp: ip,
        details: { email: user.email, role: user.role },
      },
      m,
    );
    return toPublicUser(user);
  });
}

export async function updateUser(
  actor: AuthUser,
  id: string,
  change: { name?: string; role?: Role; active?: boolean },
  ip: string,
) {
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
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'user.update',
        targetType: 'user',
        targetId: id,
        sourceIp: ip,
        details: { before, after: change },
      },
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
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'user.reset_password',
        targetType: 'user',
        targetId: id,
        sourceIp: ip,
      },
      m,
    );
  });
}

export async function changeOwnPassword(actor: AuthUser, currentPassword: string, newPassword: string, ip: string) {
  await verifyPasswordFor(
    actor,
    currentPassword,
    { action: 'user.change_password', targetType: 'user', targetId: actor.id, ip },
    'the current password is not correct',
  );
  const user = await getUser(actor.id);
  user.passwordHash = await hashPassword(newPassword);
  user.tokenVersion += 1;
  await dataSource.transaction(async (m) => {
    await m.save(user);
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'user.change_password',
        targetType: 'user',
        targetId: actor.id,
        sourceIp: ip,
      },
      m,
    );
  });
  return { token: signToken(user), expiresInSeconds: config.tokenLifetimeSeconds, user: toPublicUser(user) };
}
