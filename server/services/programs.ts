import { and, asc, eq, inArray, ne, sql } from 'drizzle-orm';
import { DateTime } from 'luxon';
import { inTx, type Db } from '../db/client';
import { controllers, programZones, programs, sites, zones, type Program, type Site } from '../db/schema/index';
import { createProgramSchema, updateProgramSchema } from '../contracts/programs';
import type { Warning } from '../contracts/common';
import { usableSupply } from '../domain/hydraulics';
import { AppError, forbidden, notFound } from '../errors';
import { parse } from '../middleware/validate';
import { occurrences, programCrons, windowConflict, type DayRule } from '../scheduler/calendar';
import { splitCycles } from '../scheduler/minutes';
import { planRun, type PlanZone } from '../scheduler/planner';
import { canSeeSite, type Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleSite } from './sites';

type Ctx = { db: Db; actor: Actor; now?: number };

const mayEdit = (a: Actor) => a.role === 'admin' || a.role === 'manager';
const fieldError = (details: { path: string; message: string }[]) => new AppError(400, 'validation_failed', 'Some fields are not valid', details);

export async function loadVisibleProgram(ctx: Ctx, id: number) {
  const [p] = await ctx.db.select().from(programs).where(eq(programs.id, id));
  if (!p || !canSeeSite(ctx.actor, p.siteId)) throw notFound('Program');
  return p;
}

async function programZonesOf(db: Db, programIds: number[]) {
  if (!programIds.length) return [];
  return db.select().from(programZones).where(inArray(programZones.programId, programIds)).orderBy(asc(programZones.position));
}

/** The plan of one occurrence of a program starting at startMs (slots with planned times). */
export async function planOccurrence(db: Db, site: Site, program: Pick<Program, 'mode' | 'seasonalPct'>, pzs: { zoneId: number; minutes: number; cycleSoak: 'off' | 'auto' | 'manual'; cycleMinutes: number | null; soakMinutes: number | null }[], startMs: number) {
  const zs = pzs.length ? await db.select({ zone: zones, ctrl: controllers }).from(zones).innerJoin(controllers, eq(zones.controllerId, controllers.id)).where(inArray(zones.id, pzs.map((p) => p.zoneId))) : [];
  const planZones: PlanZone[] = [];
  for (const pz of pzs) {
    const z = zs.find((x) => x.zone.id === pz.zoneId);
    if (!z) continue;
    const minutes = program.mode === 'seasonal' ? (pz.minutes * program.seasonalPct) / 100 : pz.minutes;
    const split = splitCycles(pz, z.zone, minutes);
    planZones.push({ zoneId: z.zone.id, controllerId: z.ctrl.id, flowLpm: z.zone.headCount * z.zone.flowPerHeadLpm, cycles: split.cycles, soakMinutes: split.soakMinutes });
  }
  return planRun({
    startMs, zones: planZones, parallel: site.allowParallel,
    usableSupplyLpm: usableSupply(site.supplyFlowLpm, site.supplyMarginPct),
    maxOpenPerController: new Map(zs.map((z) => [z.ctrl.id, z.ctrl.maxConcurrentValves])),
  });
}

/** Warnings a manager should see: starts that run into a no-watering window, and overlaps with other programs. */
async function programWarnings(db: Db, site: Site, p: Program, pzs: Parameters<typeof planOccurrence>[3], nowMs: number): Promise<Warning[]> {
  const warnings: Warning[] = [];
  const next = occurrences(p, site.timezone, nowMs, nowMs + 14 * 86_400_000).slice(0, 6);
  const others = await db.select().from(programs).where(and(eq(programs.siteId, site.id), ne(programs.id, p.id), eq(programs.enabled, true)));
  const otherZones = await programZonesOf(db, others.map((o) => o.id));
  for (const t of next.slice(0, 3)) {
    const slots = await planOccurrence(db, site, p, pzs, t);
    if (!slots.length) continue;
    const end = Math.max(...slots.map((s) => s.endMs));
    const w = windowConflict(site.restrictions, t, end, site.timezone);
    if (w) warnings.push({ code: 'runs_into_window', message: `The run starting ${fmt(t, site.timezone)} lasts until ${fmt(end, site.timezone, 'HH:mm')}: ${w}; zones that would start then are skipped` });
    for (const o of others) {
      for (const ot of occurrences(o, site.timezone, t - 86_400_000, t + 86_400_000)) {
        const os = await planOccurrence(db, site, o, otherZones.filter((z) => z.programId === o.id), ot);
        if (!os.length) continue;
        const oEnd = Math.max(...os.map((s) => s.endMs));
        if (ot <= t && oEnd > t) {
          warnings.push({ code: 'overlap', message: `Overlaps “${o.name}” (${fmt(ot, site.timezone, 'HH:mm')}–${fmt(oEnd, site.timezone, 'HH:mm')}): this run waits about ${Math.ceil((oEnd - t) / 60_000)} min for it` });
        }
      }
    }
  }
  return dedupe(warnings);
}

const dedupe = (w: Warning[]) => w.filter((x, i) => w.findIndex((y) => y.message === x.message) === i);
const fmt = (t: number, tz: string, f = 'ccc d LLL HH:mm') => DateTime.fromMillis(t, { zone: tz }).toFormat(f);

async function view(ctx: Ctx, site: Site, p: Program) {
  const pzs = await programZonesOf(ctx.db, [p.id]);
  const now = ctx.now ?? Date.now();
  const zoneList = pzs.map((z) => ({ zoneId: z.zoneId, position: z.position, minutes: z.minutes, cycleSoak: z.cycleSoak, cycleMinutes: z.cycleMinutes, soakMinutes: z.soakMinutes }));
  return {
    ...p,
    zones: zoneList,
    nextStarts: occurrences(p, site.timezone, now, now + 30 * 86_400_000).slice(0, 5).map((t) => new Date(t).toISOString()),
    warnings: await programWarnings(ctx.db, site, p, zoneList, now),
  };
}

export async function listPrograms(ctx: Ctx, siteId: number) {
  const site = await loadVisibleSite(ctx, siteId);
  const ps = await ctx.db.select().from(programs).where(eq(programs.siteId, siteId)).orderBy(programs.name);
  return Promise.all(ps.map((p) => view(ctx, site, p)));
}

export async function getProgram(ctx: Ctx, id: number) {
  const p = await loadVisibleProgram(ctx, id);
  const [site] = await ctx.db.select().from(sites).where(eq(sites.id, p.siteId));
  return view(ctx, site, p);
}

/** Check zones belong to the site and no start time falls inside a no-watering window. */
async function checkProgram(db: Db, site: Site, input: { zones?: { zoneId: number }[]; startTimes?: string[] }) {
  const details: { path: string; message: string }[] = [];
  if (input.zones) {
    const ids = input.zones.map((z) => z.zoneId);
    const found = await db.select({ id: zones.id, siteId: controllers.siteId }).from(zones).innerJoin(controllers, eq(zones.controllerId, controllers.id)).where(inArray(zones.id, ids));
    input.zones.forEach((z, i) => {
      const f = found.find((x) => x.id === z.zoneId);
      if (!f || f.siteId !== site.id) details.push({ path: `zones.${i}.zoneId`, message: 'This zone is not at this site' });
    });
  }
  for (const [i, t] of (input.startTimes ?? []).entries()) {
    const [h, m] = t.split(':').map(Number);
    const minute = h * 60 + m;
    const w = site.restrictions.noWateringWindows.find((x) => (x.startMinute < x.endMinute ? minute >= x.startMinute && minute < x.endMinute : minute >= x.startMinute || minute < x.endMinute));
    if (w) details.push({ path: `startTimes.${i}`, message: `${t} is inside the site’s no-watering hours` });
  }
  if (details.length) throw fieldError(details);
}

export async function createProgram(ctx: Ctx, siteId: number, raw: unknown) {
  const site = await loadVisibleSite(ctx, siteId);
  if (!mayEdit(ctx.actor)) throw forbidden('Only a manager or admin may write programs');
  const input = parse(createProgramSchema, raw);
  await checkProgram(ctx.db, site, input);
  const p = await inTx(ctx.db, async (tx) => {
    const { zones: zs, ...fields } = input;
    const [p] = await tx.insert(programs).values({ ...fields, siteId, dayRule: fields.dayRule as DayRule, crons: programCrons(fields) }).returning();
    await tx.insert(programZones).values(zs.map((z, i) => ({ ...z, programId: p.id, position: i + 1 })));
    await recordAudit(tx, ctx.actor, { action: 'program.create', entityType: 'program', entityId: p.id, siteId, after: input });
    return p;
  });
  return view(ctx, site, p);
}

export async function updateProgram(ctx: Ctx, id: number, raw: unknown) {
  const before = await loadVisibleProgram(ctx, id);
  if (!mayEdit(ctx.actor)) throw forbidden('Only a manager or admin may write programs');
  const input = parse(updateProgramSchema, raw);
  const [site] = await ctx.db.select().from(sites).where(eq(sites.id, before.siteId));
  await checkProgram(ctx.db, site, input);
  const beforeZones = await programZonesOf(ctx.db, [id]);
  const p = await inTx(ctx.db, async (tx) => {
    const { zones: zs, ...fields } = input;
    const merged = { startTimes: fields.startTimes ?? before.startTimes, dayRule: (fields.dayRule ?? before.dayRule) as DayRule, activeFrom: before.activeFrom, activeTo: before.activeTo };
    const [p] = await tx
      .update(programs)
      .set({ ...fields, dayRule: merged.dayRule, crons: programCrons(merged), updatedAt: sql`now()` })
      .where(eq(programs.id, id))
      .returning();
    if (zs) {
      await tx.delete(programZones).where(eq(programZones.programId, id));
      await tx.insert(programZones).values(zs.map((z, i) => ({ ...z, programId: id, position: i + 1 })));
    }
    await recordAudit(tx, ctx.actor, { action: 'program.update', entityType: 'program', entityId: id, siteId: p.siteId, before: { ...before, zones: beforeZones }, after: input });
    return p;
  });
  return view(ctx, site, p);
}

export async function deleteProgram(ctx: Ctx, id: number) {
  const before = await loadVisibleProgram(ctx, id);
  if (!mayEdit(ctx.actor)) throw forbidden('Only a manager or admin may remove programs');
  await inTx(ctx.db, async (tx) => {
    await tx.delete(programs).where(eq(programs.id, id));
    await recordAudit(tx, ctx.actor, { action: 'program.delete', entityType: 'program', entityId: id, siteId: before.siteId, before });
  });
}
