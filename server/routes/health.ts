import { Router } from 'express';
import { sql } from 'drizzle-orm';
import type { AppDeps } from '../app';

export function healthRoutes({ db }: AppDeps): Router {
  const r = Router();
  r.get('/', async (_req, res) => {
    try {
      await Promise.race([
        db.execute(sql`select 1`),
        new Promise((_, fail) => setTimeout(() => fail(new Error('timeout')), 2000).unref()),
      ]);
      res.json({ status: 'ok', db: 'up' });
    } catch {
      res.status(503).json({ status: 'degraded', db: 'down' });
    }
  });
  return r;
}
