import type { Request, Response } from 'express';
import { dataSource } from '../db/dataSource';

export async function health(_req: Request, res: Response) {
  try {
    if (!dataSource.isInitialized) throw new Error('not initialised');
    await dataSource.query('SELECT 1');
    res.json({ status: 'ok', database: 'up' });
  } catch {
    res.status(503).json({ status: 'degraded', database: 'down' });
  }
}
