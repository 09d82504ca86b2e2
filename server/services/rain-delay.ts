import { and, eq, gt, isNull } from 'drizzle-orm';
import type { Db } from '../db/client';
import { rainDelays } from '../db/schema/index';
import { rainDelaySchema } from '../contracts/programs';
import { AppError, forbidden } from '../errors';
import { parse } from '../middleware/validate';
import type { Fleet } from '../fleet/fleet';
import type { LiveBus } from '../live/bus';
import { siteHold } from '../scheduler/holds';
import type { Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleSite } from './sites';

type Ctx = { db: Db; actor: Actor; fleet: Fleet; bus: LiveBus; now: number };

/** Managers, admins, and owners for their own sites may hold watering for a while. */
const mayDelay = (a: Actor) => a.role === 'admin' || a.role === 'manager' || a.role === 'owner';

export async function setRainDelay(ctx: Ctx, siteId: number, raw: unknown) {
  const site = await loadVisibleSite(ctx, siteId);
  if (!mayDelay(ctx.actor)) throw forbidden('Technicians may not set a rain delay');
  const input = parse(rainDelaySchema, raw);
  const until = input.until ? new Date(input.until) : new Date(ctx.now + input.hours! * 3_600_000);
  if (until.getTime() <= ctx.now) throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: 'until', message: 'The end time is in the past' }]);
  const [row] = await ctx.db.insert(rainDelays).values({ siteId, startsAt: new Date(ctx.now), until, reason: input.reason, createdBy: ctx.actor.userId || null }).returning();
  await recordAudit(ctx.db, ctx.actor, { action: 'site.rain_delay', entityType: 'site', entityId: siteId, siteId, after: { until: until.toISOString(), reason: input.reason } });
  const hold = await siteHold(ctx.db, ctx.fleet, site, ctx.now);
  ctx.bus.publish({ type: 'hold', siteId, kind: 'delay', reason: hold?.reason ?? 'Rain delay', until: until.toISOString() });
  return { id: row.id, siteId, until: until.toISOString(), reason: input.reason, hold };
}

export async function cancelRainDelay(ctx: Ctx, siteId: number) {
  const site = await loadVisibleSite(ctx, siteId);
  if (!mayDelay(ctx.actor)) throw forbidden('Technicians may not change a rain delay');
  const now = new Date(ctx.now);
  const cancelled = await ctx.db
    .update(rainDelays)
    .set({ cancelledAt: now })
    .where(and(eq(rainDelays.siteId, siteId), isNull(rainDelays.cancelledAt), gt(rainDelays.until, now)))
    .returning({ id: rainDelays.id });
  await recordAudit(ctx.db, ctx.actor, { action: 'site.rain_delay_cancel', entityType: 'site', entityId: siteId, siteId, after: { cancelled: cancelled.length } });
  const hold = await siteHold(ctx.db, ctx.fleet, site, ctx.now);
  ctx.bus.publish({ type: 'hold', siteId, kind: hold?.kind ?? 'none', reason: hold?.reason ?? null });
  return { cancelled: cancelled.length, hold };
}

export async function currentHold(ctx: Omit<Ctx, 'bus'>, siteId: number) {
  const site = await loadVisibleSite(ctx, siteId);
  return { siteId, hold: await siteHold(ctx.db, ctx.fleet, site, ctx.now) };
}
