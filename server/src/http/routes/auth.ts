import type { Request, Response } from 'express';
import { currentUser, sourceIp } from '../middleware/auth';
import * as users from '../../domain/accounts/users';

export async function login(req: Request, res: Response) {
  res.json(await users.login(req.body.email, req.body.password, sourceIp(req)));
}

export async function me(req: Request, res: Response) {
  res.json({ user: users.toPublicUser(await users.getUser(currentUser(req).id)) });
}

export async function changePassword(req: Request, res: Response) {
  res.json(
    await users.changeOwnPassword(currentUser(req), req.body.currentPassword, req.body.newPassword, sourceIp(req)),
  );
}
