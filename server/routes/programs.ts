import { Router } from 'express';
import { z } from 'zod';
import { idParam } from '../contracts/common';
import { AppError } from '../errors';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { createProgram, deleteProgram, getProgram, listPrograms, updateProgram } from '../services/programs';
import { cancelRainDelay, currentHold, setRainDelay } from '../services/rain-delay';
import { siteRuns, siteTimeline } from '../services/timeline';
import type { AppDeps } from '../app';

const now = (deps: AppDeps) => (deps.clock ?? { now: () => Date.now() }).now();
const live = (deps: AppDeps) => {
  if (!deps.services) throw new AppError(503, 'live_unavailable', 'Live parts are not running on this server');
  return deps.services;
};

/** Programs: /api/sites/:id/programs and /api/programs/:id. */
export function programRoutes(deps: AppDeps): Router {
  const r = Router();
  const { db } = deps;
  r.use(requireAuth);
  r.get('/:id', async (req, res) => {
    res.json(await getProgram({ db, actor: actorOf(req), now: now(deps) }, parse(idParam, req.params).id));
  });
  r.patch('/:id', async (req, res) => {
    res.json(await updateProgram({ db, actor: actorOf(req), now: now(deps) }, parse(idParam, req.params).id, req.body));
  });
  r.delete('/:id', async (req, res) => {
    await deleteProgram({ db, actor: actorOf(req) }, parse(idParam, req.params).id);
    res.status(204).end();
  });
  return r;
}

const rangeQuery = z.object({
  from: z.iso.datetime({ offset: true }).optional(),
  to: z.iso.datetime({ offset: true }).optional(),
});
const daysQuery = z.object({ days: z.coerce.number().int().min(1).max(14).default(7) });

/** Site-scoped schedule routes: programs, timeline, runs, rain delay. */
export function siteScheduleRoutes(deps: AppDeps): Router {
  const r = Router();
  const { db } = deps;
  r.use(requireAuth);
  r.get('/:id/programs', async (req, res) => {
    res.json({ items: await listPrograms({ db, actor: actorOf(req), now: now(deps) }, parse(idParam, req.params).id) });
  });
  r.post('/:id/programs', async (req, res) => {
    res.status(201).json(await createProgram({ db, actor: actorOf(req), now: now(deps) }, parse(idParam, req.params).id, req.body));
  });
  r.get('/:id/timeline', async (req, res) => {
    const { days } = parse(daysQuery, req.query);
    res.json(await siteTimeline({ db, actor: actorOf(req), fleet: live(deps).fleet, now: now(deps) }, parse(idParam, req.params).id, days));
  });
  r.get('/:id/runs', async (req, res) => {
    const q = parse(rangeQuery, req.query);
    const t = now(deps);
    const from = q.from ? Date.parse(q.from) : t - 86_400_000;
    const to = q.to ? Date.parse(q.to) : t + 86_400_000;
    res.json({ items: await siteRuns({ db, actor: actorOf(req), now: t }, parse(idParam, req.params).id, from, to) });
  });
  r.get('/:id/hold', async (req, res) => {
    res.json(await currentHold({ db, actor: actorOf(req), fleet: live(deps).fleet, now: now(deps) }, parse(idParam, req.params).id));
  });
  r.post('/:id/rain-delay', async (req, res) => {
    const s = live(deps);
    res.status(201).json(await setRainDelay({ db, actor: actorOf(req), fleet: s.fleet, bus: s.bus, now: now(deps) }, parse(idParam, req.params).id, req.body));
  });
  r.delete('/:id/rain-delay', async (req, res) => {
    const s = live(deps);
    res.json(await cancelRainDelay({ db, actor: actorOf(req), fleet: s.fleet, bus: s.bus, now: now(deps) }, parse(idParam, req.params).id));
  });
  return r;
}
