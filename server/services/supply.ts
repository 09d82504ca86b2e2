/** Site supply: bucket tests and meter readings, their history, and applying one to the site. */
import { desc, eq, sql } from 'drizzle-orm';
import { inTx, type Db } from '../db/client';
import { sites, supplyTests, users, type Site, type SupplyTest } from '../db/schema/index';
import { supplyTestInputSchema } from '../contracts/supply';
import { parse } from '../middleware/validate';
import { AppError, forbidden } from '../errors';
import { bucketTestFlow, usableSupply } from '../domain/hydraulics';
import type { Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleSite } from './sites';
import { round, siteView } from './views';

type Ctx = { db: Db; actor: Actor };

/** Largest supply a site may hold (as in the site contract), L/min. */
const MAX_SITE_SUPPLY_LPM = 100_000;

export function supplyTestView(t: SupplyTest, site: Pick<Site, 'supplyMarginPct'>, recorder: { id: number; name: string } | null) {
  return {
    id: t.id,
    siteId: t.siteId,
    kind: t.kind,
    volumeL: t.volumeL,
    seconds: t.seconds,
    meterStartL: t.meterStartL,
    meterEndL: t.meterEndL,
    minutes: t.minutes,
    flowLpm: round(t.flowLpm, 2),
    /** This measurement after the site's safety margin, L/min. */
    usableSupplyLpm: round(usableSupply(t.flowLpm, site.supplyMarginPct), 2),
    staticPressureKPa: t.staticPressureKPa,
    note: t.note,
    applied: t.applied,
    recordedBy: recorder,
    recordedAt: t.recordedAt,
  };
}

/** The supply figures a supply screen shows at the top. */
function supplySummary(s: Site) {
  return {
    id: s.id,
    name: s.name,
    supplyFlowLpm: s.supplyFlowLpm,
    supplyMarginPct: s.supplyMarginPct,
    usableSupplyLpm: siteView(s).usableSupplyLpm,
    staticPressureKPa: s.staticPressureKPa,
  };
}

export async function listSupplyTests(ctx: Ctx, siteId: number) {
  const site = await loadVisibleSite(ctx, siteId);
  const rows = await ctx.db
    .select({ test: supplyTests, recorderName: users.name })
    .from(supplyTests)
    .leftJoin(users, eq(supplyTests.recordedBy, users.id))
    .where(eq(supplyTests.siteId, siteId))
    .orderBy(desc(supplyTests.recordedAt), desc(supplyTests.id));
  return {
    site: supplySummary(site),
    items: rows.map((r) =>
      supplyTestView(r.test, site, r.test.recordedBy && r.recorderName ? { id: r.test.recordedBy, name: r.recorderName } : null),
    ),
  };
}

/** Record a bucket test or meter reading; with apply, write the measured flow to the site (audited, before/after). */
export async function recordSupplyTest(ctx: Ctx, siteId: number, raw: unknown) {
  const site = await loadVisibleSite(ctx, siteId);
  if (!['admin', 'manager', 'technician'].includes(ctx.actor.role)) {
    throw forbidden('Only an admin, manager or technician may record a supply test');
  }
  const input = parse(supplyTestInputSchema, raw);
  const flowLpm =
    input.kind === 'bucket' ? bucketTestFlow(input.volumeL, input.seconds) : (input.meterEndL - input.meterStartL) / input.minutes;
  if (input.apply && round(flowLpm, 2) > MAX_SITE_SUPPLY_LPM) {
    const path = input.kind === 'bucket' ? 'seconds' : 'minutes';
    throw new AppError(400, 'validation_failed', 'Some fields are not valid', [
      { path, message: `A supply of ${round(flowLpm, 0)} L/min is beyond what a site may hold (${MAX_SITE_SUPPLY_LPM} L/min)` },
    ]);
  }
  return inTx(ctx.db, async (tx) => {
    const [test] = await tx
      .insert(supplyTests)
      .values({
        siteId,
        kind: input.kind,
        volumeL: input.kind === 'bucket' ? input.volumeL : null,
        seconds: input.kind === 'bucket' ? input.seconds : null,
        meterStartL: input.kind === 'meter' ? input.meterStartL : null,
        meterEndL: input.kind === 'meter' ? input.meterEndL : null,
        minutes: input.kind === 'meter' ? input.minutes : null,
        flowLpm,
        staticPressureKPa: input.staticPressureKPa ?? null,
        note: input.note,
        applied: input.apply,
        recordedBy: ctx.actor.userId || null,
      })
      .returning();
    await recordAudit(tx, ctx.actor, { action: 'supply_test.create', entityType: 'supply_test', entityId: test.id, siteId, after: test });
    let after = site;
    if (input.apply) {
      [after] = await tx
        .update(sites)
        .set({
          supplyFlowLpm: round(flowLpm, 2),
          ...(input.staticPressureKPa !== undefined ? { staticPressureKPa: input.staticPressureKPa } : {}),
          updatedAt: sql`now()`,
        })
        .where(eq(sites.id, siteId))
        .returning();
      await recordAudit(tx, ctx.actor, {
        action: 'site.supply_apply', entityType: 'site', entityId: siteId, siteId,
        before: { supplyFlowLpm: site.supplyFlowLpm, staticPressureKPa: site.staticPressureKPa, supplyTestId: null },
        after: { supplyFlowLpm: after.supplyFlowLpm, staticPressureKPa: after.staticPressureKPa, supplyTestId: test.id },
      });
    }
    return {
      test: supplyTestView(test, after, { id: ctx.actor.userId, name: ctx.actor.name }),
      usableSupplyLpm: round(usableSupply(flowLpm, after.supplyMarginPct), 2),
      site: supplySummary(after),
    };
  });
}
