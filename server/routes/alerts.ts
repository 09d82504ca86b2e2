import { Router } from 'express';
import { idParam } from '../contracts/common';
import { alertListQuerySchema } from '../contracts/alerts';
import { realClock } from '../clock';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { acknowledgeAlert, getAlert, listAlerts } from '../alerts/service';
import type { AppDeps } from '../app';

/** GET /api/alerts, GET /api/alerts/:id, POST /api/alerts/:id/acknowledge. */
export function alertRoutes(deps: AppDeps): Router {
  const { db } = deps;
  const r = Router();
  r.use(requireAuth);
  r.get('/', async (req, res) => {
    res.json(await listAlerts({ db, actor: actorOf(req) }, parse(alertListQuerySchema, req.query)));
  });
  r.get('/:id', async (req, res) => {
    res.json(await getAlert({ db, actor: actorOf(req) }, parse(idParam, req.params).id));
  });
  r.post('/:id/acknowledge', async (req, res) => {
    const ctx = { db, actor: actorOf(req), bus: deps.services?.bus, clock: deps.clock ?? realClock };
    res.json(await acknowledgeAlert(ctx, parse(idParam, req.params).id));
  });
  return r;
}
