import { Router } from 'express';
import { actorOf, requireAuth } from '../middleware/auth';
import { queryAudit } from '../services/users';
import type { AppDeps } from '../app';

/** GET /api/audit — filters: siteId, userId, action (exact or "valve.*"), entityType, from, to, page, pageSize. */
export function auditRoutes({ db }: AppDeps): Router {
  const r = Router();
  r.get('/', requireAuth, async (req, res) => {
    res.json(await queryAudit(db, actorOf(req), req.query));
  });
  return r;
}
