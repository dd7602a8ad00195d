import type { Request, Response } from 'express';
import { currentUser, sourceIp } from '../middleware/auth';
import * as users from '../../domain/accounts/users';

export async function list(_req: Request, res: Response) {
  res.json({ users: await users.listUsers() });
}

export async function create(req: Request, res: Response) {
  res.status(201).json({ user: await users.createUser(currentUser(req), req.body, sourceIp(req)) });
}

export async function update(req: Request, res: Response) {
  res.json({ user: await users.updateUser(currentUser(req), String(req.params.id), req.body, sourceIp(req)) });
}

export async function resetPassword(req: Request, res: Response) {
  await users.resetPassword(currentUser(req), String(req.params.id), req.body.newPassword, sourceIp(req));
  res.status(204).end();
}
