import { Router } from 'express';
import { idParam } from '../contracts/common';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { listSupplyTests, recordSupplyTest } from '../services/supply';
import type { AppDeps } from '../app';

/** Supply tests of a site. Mounted at /api/sites (next to the site routes). */
export function supplyRoutes({ db }: AppDeps): Router {
  const r = Router();
  r.get('/:id/supply-tests', requireAuth, async (req, res) => {
    res.json(await listSupplyTests({ db, actor: actorOf(req) }, parse(idParam, req.params).id));
  });
  r.post('/:id/supply-tests', requireAuth, async (req, res) => {
    res.status(201).json(await recordSupplyTest({ db, actor: actorOf(req) }, parse(idParam, req.params).id, req.body));
  });
  return r;
}
