import { and, asc, eq, gte, inArray, lt } from 'drizzle-orm';
import { DateTime } from 'luxon';
import type { Db } from '../db/client';
import { programZones, programs, runs, zoneRuns, zones } from '../db/schema/index';
import type { Fleet } from '../fleet/fleet';
import { dayRestriction, occurrences, windowConflict } from '../scheduler/calendar';
import { siteHold } from '../scheduler/holds';
import type { Actor } from './actor';
import { planOccurrence } from './programs';
import { loadVisibleSite } from './sites';

type Ctx = { db: Db; actor: Actor; fleet: Fleet; now: number };

/** The coming days at a site: planned zone slots, holds, restriction windows, and the litres per day they would use. */
export async function siteTimeline(ctx: Ctx, siteId: number, days = 7) {
  const site = await loadVisibleSite(ctx, siteId);
  const tz = site.timezone;
  const start = DateTime.fromMillis(ctx.now, { zone: tz }).startOf('day');
  const end = start.plus({ days });
  const hold = await siteHold(ctx.db, ctx.fleet, site, ctx.now);
  const ps = await ctx.db.select().from(programs).where(and(eq(programs.siteId, siteId), eq(programs.enabled, true)));
  const pzs = ps.length ? await ctx.db.select().from(programZones).where(inArray(programZones.programId, ps.map((p) => p.id))).orderBy(asc(programZones.position)) : [];
  const zoneNames = new Map((await ctx.db.select({ id: zones.id, name: zones.name }).from(zones)).map((z) => [z.id, z.name]));
  const slots: { programId: number; programName: string; zoneId: number; zoneName: string; cycle: number; start: string; end: string; litres: number; status: 'planned' | 'restricted' | 'held'; reason: string | null }[] = [];
  for (const p of ps) {
    for (const t of occurrences(p, tz, start.toMillis() - 1, end.toMillis())) {
      const plan = await planOccurrence(ctx.db, site, p, pzs.filter((z) => z.programId === p.id), t);
      const dayR = dayRestriction(site.restrictions, t, tz);
      for (const s of plan) {
        const w = windowConflict(site.restrictions, s.startMs, s.endMs, tz);
        const held = hold && (hold.until === null ? s.startMs < ctx.now + 6 * 3_600_000 : s.startMs < hold.until);
        const status = dayR || w ? 'restricted' : held ? 'held' : 'planned';
        slots.push({
          programId: p.id, programName: p.name, zoneId: s.zoneId, zoneName: zoneNames.get(s.zoneId) ?? `Zone ${s.zoneId}`, cycle: s.cycle,
          start: new Date(s.startMs).toISOString(), end: new Date(s.endMs).toISOString(),
          litres: Math.round(s.flowLpm * ((s.endMs - s.startMs) / 60_000) * 10) / 10,
          status, reason: dayR ?? w ?? (held ? hold!.reason : null),
        });
      }
    }
  }
  const dayList = Array.from({ length: days }, (_, i) => start.plus({ days: i }));
  const windows = dayList.flatMap((d) =>
    site.restrictions.noWateringWindows.map((w) => {
      const s = d.plus({ minutes: w.startMinute });
      const e = w.endMinute > w.startMinute ? d.plus({ minutes: w.endMinute }) : d.plus({ days: 1, minutes: w.endMinute });
      return { start: s.toISO()!, end: e.toISO()!, reason: 'No-watering hours' };
    }),
  );
  const restrictedDays = dayList.map((d) => ({ date: d.toISODate()!, reason: dayRestriction(site.restrictions, d.plus({ hours: 12 }).toMillis(), tz) })).filter((d) => d.reason);
  const litresByDay = dayList.map((d) => {
    const date = d.toISODate()!;
    const litres = slots.filter((s) => s.status === 'planned' && DateTime.fromISO(s.start, { zone: tz }).toISODate() === date).reduce((a, s) => a + s.litres, 0);
    return { date, litres: Math.round(litres) };
  });
  return { siteId, timezone: tz, from: start.toISO(), to: end.toISO(), hold, slots, windows, restrictedDays, days: litresByDay };
}

/** Runs at a site in a time range, with their zone runs: what ran, what was skipped and why. */
export async function siteRuns(ctx: Omit<Ctx, 'fleet'>, siteId: number, fromMs: number, toMs: number) {
  await loadVisibleSite(ctx, siteId);
  const rs = await ctx.db.select().from(runs).where(and(eq(runs.siteId, siteId), gte(runs.scheduledFor, new Date(fromMs)), lt(runs.scheduledFor, new Date(toMs)))).orderBy(asc(runs.scheduledFor));
  const zrs = rs.length ? await ctx.db.select().from(zoneRuns).where(inArray(zoneRuns.runId, rs.map((r) => r.id))).orderBy(asc(zoneRuns.plannedStart)) : [];
  const names = new Map((await ctx.db.select({ id: programs.id, name: programs.name }).from(programs).where(eq(programs.siteId, siteId))).map((p) => [p.id, p.name]));
  return rs.map((r) => ({ ...r, programName: r.programId ? (names.get(r.programId) ?? null) : null, zones: zrs.filter((z) => z.runId === r.id) }));
}
