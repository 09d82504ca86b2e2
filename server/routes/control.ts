import { Router, type Request } from 'express';
import { z } from 'zod';
import { idParam } from '../contracts/common';
import { AppError, conflict, forbidden } from '../errors';
import { realClock } from '../clock';
import { siteHold } from '../scheduler/holds';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { recordAudit } from '../services/audit';
import { loadVisibleSite } from '../services/sites';
import { loadVisibleZone } from '../services/zones';
import type { AppDeps } from '../app';

function services(deps: AppDeps) {
  if (!deps.services) throw new AppError(503, 'live_unavailable', 'Valve control is not running on this server');
  return deps.services;
}

function mayControl(req: Request) {
  const actor = actorOf(req);
  if (actor.role === 'owner') throw forbidden('Owners may not open or close valves');
  return actor;
}

/** Manual valve control: POST /api/zones/:id/start, /api/zones/:id/stop. */
export function zoneControlRoutes(deps: AppDeps): Router {
  const r = Router();
  const { db } = deps;
  const startBody = z.strictObject({
    minutes: z
      .number()
      .int('Whole minutes')
      .min(1, 'At least 1 minute')
      .max(deps.config.MANUAL_MAX_MINUTES, `At most ${deps.config.MANUAL_MAX_MINUTES} minutes`),
    /** A technician testing a valve during a rain hold says so explicitly; it is audited. */
    overrideHold: z.boolean().optional(),
  });
  r.use(requireAuth);
  r.post('/:id/start', async (req, res) => {
    const { id } = parse(idParam, req.params);
    const { zone, site } = await loadVisibleZone({ db, actor: actorOf(req) }, id);
    const actor = mayControl(req);
    const { minutes, overrideHold } = parse(startBody, req.body);
    const s = services(deps);
    const hold = await siteHold(db, s.fleet, site, (deps.clock ?? realClock).now());
    if (hold) {
      if (!(actor.role === 'technician' && overrideHold)) {
        await recordAudit(db, actor, { action: 'valve.start', entityType: 'zone', entityId: zone.id, siteId: site.id, outcome: 'held', after: { minutes, hold: hold.reason } });
        throw conflict('rain_hold', `${hold.reason}. ${actor.role === 'technician' ? 'To test a valve anyway, start it with the hold override.' : 'Watering resumes when the hold ends.'}`, { hold });
      }
      await recordAudit(db, actor, { action: 'valve.hold_override', entityType: 'zone', entityId: zone.id, siteId: site.id, outcome: 'override', after: { minutes, hold: hold.reason } });
    }
    try {
      const already = s.dispatcher.siteActivity(site.id).active.some((a) => a.zoneId === zone.id);
      const onOutcome = already ? undefined : await s.scheduler.executor.recordManual(zone.id, minutes * 60, 'manual');
      const out = await s.dispatcher.start({ zoneId: zone.id, seconds: minutes * 60, origin: 'manual', actor, onOutcome }).catch((e) => {
        onOutcome?.({ kind: 'failed', at: Date.now(), error: (e as Error).message });
        throw e;
      });
      await recordAudit(db, actor, { action: 'valve.start', entityType: 'zone', entityId: zone.id, siteId: site.id, outcome: out.state, after: { minutes, commandId: out.commandId } });
      res.status(202).json({ ...out, minutes, message: out.state === 'queued' ? `Queued: ${out.reason}` : 'Sent to the board; waiting for its acknowledgement' });
    } catch (e) {
      await recordAudit(db, actor, { action: 'valve.start', entityType: 'zone', entityId: zone.id, siteId: site.id, outcome: 'refused', after: { minutes, error: (e as Error).message } });
      throw e;
    }
  });
  r.post('/:id/stop', async (req, res) => {
    const { id } = parse(idParam, req.params);
    const { zone, site } = await loadVisibleZone({ db, actor: actorOf(req) }, id);
    const actor = mayControl(req);
    const s = services(deps);
    await recordAudit(db, actor, { action: 'valve.stop', entityType: 'zone', entityId: zone.id, siteId: site.id, outcome: 'requested' });
    void s.dispatcher.close(zone.id, site.id, 'stopped', actor);
    res.status(202).json({ zoneId: zone.id, message: 'Closing' });
  });
  return r;
}

/** POST /api/sites/:id/stop closes every valve of the site; GET /api/sites/:id/activity shows what runs and waits. */
export function siteControlRoutes(deps: AppDeps): Router {
  const r = Router();
  const { db } = deps;
  r.use(requireAuth);
  r.post('/:id/stop', async (req, res) => {
    const { id } = parse(idParam, req.params);
    await loadVisibleSite({ db, actor: actorOf(req) }, id);
    const actor = mayControl(req);
    const s = services(deps);
    await recordAudit(db, actor, { action: 'site.stop_all', entityType: 'site', entityId: id, siteId: id, outcome: 'requested' });
    void s.dispatcher.stopSite(id, 'stopped', actor);
    res.status(202).json({ siteId: id, message: 'Closing every valve of the site' });
  });
  r.get('/:id/activity', async (req, res) => {
    const { id } = parse(idParam, req.params);
    await loadVisibleSite({ db, actor: actorOf(req) }, id);
    res.json(services(deps).dispatcher.siteActivity(id));
  });
  return r;
}
