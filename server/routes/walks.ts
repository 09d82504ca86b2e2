import { Router } from 'express';
import { z } from 'zod';
import { idParam } from '../contracts/common';
import { AppError } from '../errors';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { serviceRecords, users } from '../db/schema/index';
import { desc, eq } from 'drizzle-orm';
import { loadVisibleZone } from '../services/zones';
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
    const { zone } = await loadVisibleZone({ db: deps.db, actor: actorOf(req) }, parse(idParam, req.params).id);
    const rows = await deps.db
      .select({ id: serviceRecords.id, kind: serviceRecords.kind, summary: serviceRecords.summary, details: serviceRecords.details, createdAt: serviceRecords.createdAt, author: users.name })
      .from(serviceRecords)
      .leftJoin(users, eq(serviceRecords.authorId, users.id))
      .where(eq(serviceRecords.zoneId, zone.id))
      .orderBy(desc(serviceRecords.createdAt))
      .limit(100);
    res.json({ items: rows });
  });
  return { sites, walks, zoneRecords };
}
