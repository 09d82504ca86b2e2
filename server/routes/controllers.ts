import { Router } from 'express';
import { z } from 'zod';
import { idParam } from '../contracts/common';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { controllerView } from '../services/views';
import { createController, deleteController, listControllers, loadVisibleController, updateController } from '../services/controllers';
import type { AppDeps } from '../app';

const listQuery = z.object({ siteId: z.coerce.number().int().positive().optional() });

export function controllerRoutes({ db }: AppDeps): Router {
  const r = Router();
  r.use(requireAuth);
  r.get('/', async (req, res) => {
    const { siteId } = parse(listQuery, req.query);
    res.json({ items: await listControllers({ db, actor: actorOf(req) }, siteId) });
  });
  r.post('/', async (req, res) => {
    res.status(201).json(await createController({ db, actor: actorOf(req) }, req.body));
  });
  r.get('/:id', async (req, res) => {
    res.json(controllerView(await loadVisibleController({ db, actor: actorOf(req) }, parse(idParam, req.params).id)));
  });
  r.patch('/:id', async (req, res) => {
    res.json(await updateController({ db, actor: actorOf(req) }, parse(idParam, req.params).id, req.body));
  });
  r.delete('/:id', async (req, res) => {
    await deleteController({ db, actor: actorOf(req) }, parse(idParam, req.params).id);
    res.status(204).end();
  });
  return r;
}
