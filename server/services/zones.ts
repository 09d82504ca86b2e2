import { and, eq, inArray, ne, sql } from 'drizzle-orm';
import type { Db } from '../db/client';
import { inTx } from '../db/client';
import { controllers, sites, zones } from '../db/schema/index';
import { createZoneSchema, technicianZoneFields, updateZoneSchema } from '../contracts/zones';
import { parse } from '../middleware/validate';
import { AppError, conflict, forbidden, notFound } from '../errors';
import { canSeeSite, type Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleController } from './controllers';
import { loadVisibleSite } from './sites';
import { zoneView } from './views';

type Ctx = { db: Db; actor: Actor };

export async function loadVisibleZone({ db, actor }: Ctx, id: number) {
  const [row] = await db
    .select({ zone: zones, controller: controllers, site: sites })
    .from(zones)
    .innerJoin(controllers, eq(zones.controllerId, controllers.id))
    .innerJoin(sites, eq(controllers.siteId, sites.id))
    .where(eq(zones.id, id));
  if (!row || !canSeeSite(actor, row.site.id)) throw notFound('Zone');
  return row;
}

export async function getZone(ctx: Ctx, id: number) {
  const { zone, site } = await loadVisibleZone(ctx, id);
  return zoneView(zone, site);
}

export async function listZones(ctx: Ctx, siteId?: number) {
  const { db, actor } = ctx;
  if (siteId !== undefined) await loadVisibleSite(ctx, siteId);
  const ids = actor.siteIds === 'all' ? null : [...actor.siteIds];
  if (ids && ids.length === 0) return [];
  const rows = await db
    .select({ zone: zones, site: sites })
    .from(zones)
    .innerJoin(controllers, eq(zones.controllerId, controllers.id))
    .innerJoin(sites, eq(controllers.siteId, sites.id))
    .where(and(siteId !== undefined ? eq(sites.id, siteId) : undefined, ids ? inArray(sites.id, ids) : undefined))
    .orderBy(sites.id, zones.controllerId, zones.relay);
  return rows.map((r) => zoneView(r.zone, r.site));
}

function fieldError(path: string, message: string) {
  return new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path, message }]);
}

/** Relay must exist on the board, not be the master valve, and not be wired to another zone. */
async function checkRelay(db: Db, controller: typeof controllers.$inferSelect, relay: number, exceptZoneId?: number) {
  if (relay > controller.relayCount) {
    throw fieldError('relay', `This controller has ${controller.relayCount} relays`);
  }
  if (controller.masterValveRelay === relay) {
    throw conflict('relay_taken', `Relay ${relay} drives the master valve`, [{ path: 'relay', message: 'Relay drives the master valve' }]);
  }
  const [taken] = await db
    .select({ id: zones.id, name: zones.name })
    .from(zones)
    .where(and(eq(zones.controllerId, controller.id), eq(zones.relay, relay), exceptZoneId ? ne(zones.id, exceptZoneId) : undefined));
  if (taken) {
    throw conflict('relay_taken', `Relay ${relay} is already wired to ${taken.name}`, [{ path: 'relay', message: 'Relay already taken' }]);
  }
}

export async function createZone(ctx: Ctx, raw: unknown) {
  if (ctx.actor.role !== 'admin' && ctx.actor.role !== 'manager') throw forbidden('Only an admin or manager may add a zone');
  const input = parse(createZoneSchema, raw);
  const controller = await loadVisibleController(ctx, input.controllerId).catch(() => {
    throw fieldError('controllerId', 'No such controller');
  });
  await checkRelay(ctx.db, controller, input.relay);
  const site = await loadVisibleSite(ctx, controller.siteId);
  return inTx(ctx.db, async (tx) => {
    const [z] = await tx.insert(zones).values(input).returning();
    const view = zoneView(z, site);
    await recordAudit(tx, ctx.actor, { action: 'zone.create', entityType: 'zone', entityId: z.id, siteId: site.id, after: view });
    return view;
  }).catch(uniqueToConflict);
}

export async function updateZone(ctx: Ctx, id: number, raw: unknown) {
  const { actor } = ctx;
  const before = await loadVisibleZone(ctx, id);
  if (actor.role === 'owner') throw forbidden('Owners may not change zones');
  const input = parse(updateZoneSchema, raw);
  if (actor.role === 'technician') {
    const extra = Object.keys(input).filter((k) => !(technicianZoneFields as readonly string[]).includes(k));
    if (extra.length) throw forbidden(`A technician may change only ${technicianZoneFields.join(', ')}`);
  }
  const otherHeadType = input.otherHeadType === undefined ? before.zone.otherHeadType : input.otherHeadType;
  if (otherHeadType !== null && otherHeadType === (input.headType ?? before.zone.headType)) {
    throw fieldError('otherHeadType', 'The other head type must differ from the head type');
  }
  let controller = before.controller;
  if (input.controllerId !== undefined && input.controllerId !== controller.id) {
    controller = await loadVisibleController(ctx, input.controllerId).catch(() => {
      throw fieldError('controllerId', 'No such controller');
    });
  }
  if (input.relay !== undefined || controller.id !== before.controller.id) {
    await checkRelay(ctx.db, controller, input.relay ?? before.zone.relay, id);
  }
  const site = controller.siteId === before.site.id ? before.site : await loadVisibleSite(ctx, controller.siteId);
  return inTx(ctx.db, async (tx) => {
    const [z] = await tx.update(zones).set({ ...input, updatedAt: sql`now()` }).where(eq(zones.id, id)).returning();
    const view = zoneView(z, site);
    await recordAudit(tx, actor, {
      action: 'zone.update', entityType: 'zone', entityId: id, siteId: site.id,
      before: zoneView(before.zone, before.site), after: view,
    });
    return view;
  }).catch(uniqueToConflict);
}

export async function deleteZone(ctx: Ctx, id: number) {
  const before = await loadVisibleZone(ctx, id);
  if (ctx.actor.role !== 'admin' && ctx.actor.role !== 'manager') throw forbidden('Only an admin or manager may remove a zone');
  await inTx(ctx.db, async (tx) => {
    await tx.delete(zones).where(eq(zones.id, id));
    await recordAudit(tx, ctx.actor, { action: 'zone.delete', entityType: 'zone', entityId: id, siteId: before.site.id, before: zoneView(before.zone, before.site) });
  });
}

function uniqueToConflict(e: unknown): never {
  const code = (e as { code?: string; cause?: { code?: string } })?.cause?.code ?? (e as { code?: string })?.code;
  if (code === '23505') throw conflict('relay_taken', 'That relay is already taken', [{ path: 'relay', message: 'Relay already taken' }]);
  throw e;
}

export { notFound };
