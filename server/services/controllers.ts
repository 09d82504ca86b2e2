import { and, eq, gt, inArray, sql } from 'drizzle-orm';
import type { Db } from '../db/client';
import { inTx } from '../db/client';
import { controllers, zones } from '../db/schema/index';
import { createControllerSchema, updateControllerSchema } from '../contracts/controllers';
import { parse } from '../middleware/validate';
import { AppError, conflict, forbidden, notFound } from '../errors';
import { canSeeSite, type Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleSite } from './sites';
import { controllerView } from './views';

type Ctx = { db: Db; actor: Actor };

export async function loadVisibleController({ db, actor }: Ctx, id: number) {
  const [c] = await db.select().from(controllers).where(eq(controllers.id, id));
  if (!c || !canSeeSite(actor, c.siteId)) throw notFound('Controller');
  return c;
}

export async function listControllers(ctx: Ctx, siteId?: number) {
  const { db, actor } = ctx;
  if (siteId !== undefined) await loadVisibleSite(ctx, siteId);
  const ids = actor.siteIds === 'all' ? null : [...actor.siteIds];
  if (ids && ids.length === 0) return [];
  const conds = [siteId !== undefined ? eq(controllers.siteId, siteId) : undefined, ids ? inArray(controllers.siteId, ids) : undefined];
  const rows = await db
    .select()
    .from(controllers)
    .where(and(...conds.filter(Boolean)))
    .orderBy(controllers.siteId, controllers.name);
  return rows.map(controllerView);
}

export async function createController(ctx: Ctx, raw: unknown) {
  if (ctx.actor.role !== 'admin') throw forbidden('Only an admin may provision a controller');
  const input = parse(createControllerSchema, raw);
  await loadVisibleSite(ctx, input.siteId).catch(() => {
    throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: 'siteId', message: 'No such site' }]);
  });
  const [dup] = await ctx.db.select({ id: controllers.id }).from(controllers).where(eq(controllers.serial, input.serial));
  if (dup) throw conflict('serial_taken', `Serial ${input.serial} is already in use`, [{ path: 'serial', message: 'Serial already in use' }]);
  return inTx(ctx.db, async (tx) => {
    const [c] = await tx.insert(controllers).values(input).returning();
    await recordAudit(tx, ctx.actor, { action: 'controller.create', entityType: 'controller', entityId: c.id, siteId: c.siteId, after: controllerView(c) });
    return controllerView(c);
  });
}

export async function updateController(ctx: Ctx, id: number, raw: unknown) {
  const before = await loadVisibleController(ctx, id);
  if (ctx.actor.role !== 'admin' && ctx.actor.role !== 'manager') throw forbidden('Only an admin or manager may change a controller');
  const input = parse(updateControllerSchema, raw);
  if (input.siteId !== undefined && input.siteId !== before.siteId) {
    if (ctx.actor.role !== 'admin') throw forbidden('Only an admin may move a controller to another site');
    await loadVisibleSite(ctx, input.siteId).catch(() => {
      throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: 'siteId', message: 'No such site' }]);
    });
  }
  const relayCount = input.relayCount ?? before.relayCount;
  const master = input.masterValveRelay !== undefined ? input.masterValveRelay : before.masterValveRelay;
  if (master !== null && master > relayCount) {
    throw new AppError(400, 'validation_failed', 'Some fields are not valid', [
      { path: 'masterValveRelay', message: 'The master valve relay must exist on the board' },
    ]);
  }
  const [high] = await ctx.db
    .select({ relay: zones.relay })
    .from(zones)
    .where(and(eq(zones.controllerId, id), gt(zones.relay, relayCount)))
    .limit(1);
  if (high) throw conflict('relay_in_use', `Relay ${high.relay} is wired to a zone; move that zone first`, [{ path: 'relayCount', message: 'A zone uses a higher relay' }]);
  if (master !== null) {
    const [onMaster] = await ctx.db.select({ id: zones.id }).from(zones).where(and(eq(zones.controllerId, id), eq(zones.relay, master)));
    if (onMaster) throw conflict('relay_taken', `Relay ${master} is already wired to a zone`, [{ path: 'masterValveRelay', message: 'Relay already used by a zone' }]);
  }
  return inTx(ctx.db, async (tx) => {
    const [c] = await tx.update(controllers).set({ ...input, updatedAt: sql`now()` }).where(eq(controllers.id, id)).returning();
    await recordAudit(tx, ctx.actor, {
      action: 'controller.update', entityType: 'controller', entityId: id, siteId: c.siteId,
      before: controllerView(before), after: controllerView(c),
    });
    return controllerView(c);
  });
}

export async function deleteController(ctx: Ctx, id: number) {
  const before = await loadVisibleController(ctx, id);
  if (ctx.actor.role !== 'admin') throw forbidden('Only an admin may remove a controller');
  await inTx(ctx.db, async (tx) => {
    await tx.delete(controllers).where(eq(controllers.id, id));
    await recordAudit(tx, ctx.actor, { action: 'controller.delete', entityType: 'controller', entityId: id, siteId: before.siteId, before: controllerView(before) });
  });
}
