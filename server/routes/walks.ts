import { Router } from 'express';
import { z } from 'zod';
import { idParam } from '../contracts/common';
import { AppError } from '../errors';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { listServiceRecords } from '../services/service-records';
import { WalkService } from '../services/walks';
import { realClock } from '../clock';
import type { AppDeps } from '../app';

const walkId = z.object({ id: z.string().uuid() });

function walksOf(deps: AppDeps): WalkService {
  const s = deps.services;
  if (!s) throw new AppError(503, 'live_unavailable', 'Valve control is not running on this server');
  const holder = s as typeof s & { walks?: WalkService };
  holder.walks ??= new WalkService(deps.db, s, deps.clock ?? realClock);
  return holder.walks;
}

/** POST /api/sites/:id/walks; GET/POST /api/walks/:id(/step); GET /api/zones/:id/service-records. */
export function walkRoutes(deps: AppDeps) {
  const sites = Router();
  sites.use(requireAuth);
  sites.post('/:id/walks', async (req, res) => {
    res.status(201).json(await walksOf(deps).start(actorOf(req), parse(idParam, req.params).id, req.body));
  });
  const walks = Router();
  walks.use(requireAuth);
  walks.get('/:id', async (req, res) => {
    res.json(walksOf(deps).get(actorOf(req), parse(walkId, req.params).id));
  });
  walks.post('/:id/step', async (req, res) => {
    res.json(await walksOf(deps).step(actorOf(req), parse(walkId, req.params).id, req.body));
  });
  const zoneRecords = Router();
  zoneRecords.use(requireAuth);
  zoneRecords.get('/:id/service-records', async (req, res) => {
    // Walk results and technicians' notes, with their photos (server/services/service-records.ts).
    res.json({ items: await listServiceRecords({ db: deps.db, actor: actorOf(req) }, { zoneId: parse(idParam, req.params).id }) });
  });
  return { sites, walks, zoneRecords };
}
