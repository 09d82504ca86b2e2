import { Router } from 'express';
import { idParam } from '../contracts/common';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { groupHeads, sitePlanning, wateringNeedForSite } from '../services/planning';
import type { AppDeps } from '../app';

/** Read-only planning figures. Mounted at /api. */
export function planningRoutes({ db, clock }: AppDeps): Router {
  const now = () => (clock ? clock.now() : Date.now());
  const r = Router();
  r.get('/sites/:id/planning', requireAuth, async (req, res) => {
    res.json(await sitePlanning({ db, actor: actorOf(req) }, parse(idParam, req.params).id, req.query));
  });
  r.get('/sites/:id/watering-need', requireAuth, async (req, res) => {
    res.json(await wateringNeedForSite({ db, actor: actorOf(req), now }, parse(idParam, req.params).id, req.query));
  });
  r.post('/planning/group-heads', requireAuth, (req, res) => {
    res.json(groupHeads(req.body));
  });
  return r;
}
