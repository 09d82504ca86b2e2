import { Router } from 'express';
import { idParam } from '../contracts/common';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { createSite, deleteSite, getSite, listSites, updateSite } from '../services/sites';
import type { AppDeps } from '../app';

export function siteRoutes({ db }: AppDeps): Router {
  const r = Router();
  r.use(requireAuth);
  r.get('/', async (req, res) => {
    res.json({ items: await listSites({ db, actor: actorOf(req) }) });
  });
  r.post('/', async (req, res) => {
    res.status(201).json(await createSite({ db, actor: actorOf(req) }, req.body));
  });
  r.get('/:id', async (req, res) => {
    res.json(await getSite({ db, actor: actorOf(req) }, parse(idParam, req.params).id));
  });
  r.patch('/:id', async (req, res) => {
    res.json(await updateSite({ db, actor: actorOf(req) }, parse(idParam, req.params).id, req.body));
  });
  r.delete('/:id', async (req, res) => {
    await deleteSite({ db, actor: actorOf(req) }, parse(idParam, req.params).id);
    res.status(204).end();
  });
  return r;
}
