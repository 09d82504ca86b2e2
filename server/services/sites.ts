import { and, eq, inArray, sql } from 'drizzle-orm';
import { inTx, type Db } from '../db/client';
import { controllers, sites, zones } from '../db/schema/index';
import { createSiteSchema, updateSiteSchema } from '../contracts/sites';
import { parse } from '../middleware/validate';
import { conflict, forbidden, notFound } from '../errors';
import { canSeeSite, type Actor } from './actor';
import { recordAudit } from './audit';
import { controllerView, siteView, zoneView } from './views';
import { et0InputsChanged, recomputeSiteEt0 } from './et0';

type Ctx = { db: Db; actor: Actor };

function visibleIds(actor: Actor): number[] | 'all' {
  return actor.siteIds === 'all' ? 'all' : [...actor.siteIds];
}

/** A site the actor may not see does not exist for them: 404, never 403. */
export async function loadVisibleSite({ db, actor }: Ctx, id: number) {
  if (!canSeeSite(actor, id)) throw notFound('Site');
  const [s] = await db.select().from(sites).where(eq(sites.id, id));
  if (!s) throw notFound('Site');
  return s;
}

export async function listSites({ db, actor }: Ctx) {
  const ids = visibleIds(actor);
  if (ids !== 'all' && ids.length === 0) return [];
  const where = ids === 'all' ? undefined : inArray(sites.id, ids);
  const rows = await db.select().from(sites).where(where).orderBy(sites.name);
  if (rows.length === 0) return [];
  const siteIds = rows.map((r) => r.id);
  const ctrls = await db.select().from(controllers).where(inArray(controllers.siteId, siteIds));
  const zs = ctrls.length
    ? await db.select().from(zones).where(inArray(zones.controllerId, ctrls.map((c) => c.id)))
    : [];
  return rows.map((s) => {
    const cs = ctrls.filter((c) => c.siteId === s.id && !c.retiredAt);
    const csIds = new Set(cs.map((c) => c.id));
    const zv = zs.filter((z) => csIds.has(z.controllerId)).map((z) => zoneView(z, s));
    return {
      ...siteView(s),
      controllerCount: cs.length,
      onlineControllers: cs.filter((c) => c.online).length,
      zoneCount: zv.length,
      warnings: zv.flatMap((z) => z.warnings),
    };
  });
}

export async function getSite(ctx: Ctx, id: number) {
  const s = await loadVisibleSite(ctx, id);
  const cs = await ctx.db.select().from(controllers).where(eq(controllers.siteId, id)).orderBy(controllers.name);
  const zs = cs.length
    ? await ctx.db
        .select()
        .from(zones)
        .where(inArray(zones.controllerId, cs.map((c) => c.id)))
        .orderBy(zones.controllerId, zones.relay)
    : [];
  const zv = zs.map((z) => zoneView(z, s));
  return {
    ...siteView(s),
    controllers: cs.map(controllerView),
    zones: zv,
    warnings: zv.flatMap((z) => z.warnings),
  };
}

export async function createSite({ db, actor }: Ctx, raw: unknown) {
  if (actor.role !== 'admin') throw forbidden('Only an admin may add a site');
  const input = parse(createSiteSchema, raw);
  return inTx(db, async (tx) => {
    const [s] = await tx.insert(sites).values(input).returning();
    await recordAudit(tx, actor, { action: 'site.create', entityType: 'site', entityId: s.id, siteId: s.id, after: s });
    return siteView(s);
  });
}

export async function updateSite(ctx: Ctx, id: number, raw: unknown) {
  const before = await loadVisibleSite(ctx, id);
  if (ctx.actor.role !== 'admin' && ctx.actor.role !== 'manager') throw forbidden('Only an admin or manager may change a site');
  const input = parse(updateSiteSchema, raw);
  return inTx(ctx.db, async (tx) => {
    // Compared with the row as locked here, so a concurrent update is not missed.
    const [locked] = await tx.select().from(sites).where(eq(sites.id, id)).for('update');
    if (!locked) throw notFound('Site');
    const [s] = await tx.update(sites).set({ ...input, updatedAt: sql`now()` }).where(eq(sites.id, id)).returning();
    // Stored ET₀ depends on the site's latitude, elevation and coastal flag: follow a change.
    if (et0InputsChanged(locked, s)) await recomputeSiteEt0(tx, id, s);
    await recordAudit(tx, ctx.actor, { action: 'site.update', entityType: 'site', entityId: id, siteId: id, before, after: s });
    return siteView(s);
  });
}

export async function deleteSite(ctx: Ctx, id: number) {
  const before = await loadVisibleSite(ctx, id);
  if (ctx.actor.role !== 'admin') throw forbidden('Only an admin may remove a site');
  const [{ n }] = await ctx.db
    .select({ n: sql<number>`count(*)::int` })
    .from(controllers)
    .where(and(eq(controllers.siteId, id)));
  if (n > 0) throw conflict('site_has_controllers', 'Move or remove the site’s controllers first');
  await ctx.db.delete(sites).where(eq(sites.id, id));
  await recordAudit(ctx.db, ctx.actor, { action: 'site.delete', entityType: 'site', entityId: id, siteId: id, before });
}
