import { sql } from 'drizzle-orm';
import type { Db } from '../db/client';
import { soilWaterBalance, totalAvailableWater } from '../domain/agronomy';
import { badRequest } from '../errors';
import { BALANCE_DAYS } from '../scheduler/minutes';
import type { Actor } from '../services/actor';
import { loadVisibleSite } from '../services/sites';
import { notAsPlannedStates, type ZoneRunState } from '../contracts/history';
import { siteDailyUse, siteWeather, siteZones, type ZoneFacts } from './site-data';
import { addDays, dateRange, daysBetween, iso, numOrNull, round, todayAt } from './sql';
import { basisOf } from './water-use';

type Ctx = { db: Db; actor: Actor; now: number };

export const REVIEW_MAX_DAYS = 366;
export const REVIEW_DEFAULT_DAYS = 30;

export type MissCategory = 'rain_hold' | 'restriction' | 'not_needed' | 'fault' | 'stopped';
const CATEGORY: Record<string, MissCategory> = {
  held_rain: 'rain_hold',
  skipped_restriction: 'restriction',
  skipped_not_needed: 'not_needed',
  failed: 'fault',
  stopped: 'stopped',
};

export type MissedRun = {
  runId: number;
  programId: number | null;
  programName: string | null;
  localDate: string;
  plannedStart: string;
  state: ZoneRunState;
  category: MissCategory;
  reason: string | null;
  /** Cycles of this run at this zone that did not go as planned. */
  cycles: number;
  plannedMinutes: number;
};

export type DepletionDay = {
  date: string;
  et0Mm: number;
  kc: number;
  etcMm: number;
  rainMm: number;
  effectiveRainMm: number;
  irrigationMm: number;
  depletionMm: number;
  rawMm: number;
  needsWater: boolean;
};

const plural = (n: number, one: string, many = `${one}s`) => `${n} ${n === 1 ? one : many}`;
const lowerFirst = (s: string) => (s ? s[0].toLowerCase() + s.slice(1) : s);

/** "Zone 3 received 41 % of its demand: 6 runs skipped for the restriction: no watering on Wednesdays at this site" */
export function summaryLine(name: string, metPct: number | null, missed: MissedRun[]): string {
  const head = metPct === null ? `${name}: no weather is recorded for this period, so its demand is not known` : `${name} received ${metPct} % of its demand`;
  if (!missed.length) return `${head}; every run went as planned.`;
  const groups = new Map<string, { category: MissCategory; reason: string | null; n: number }>();
  for (const m of missed) {
    const reason = m.category === 'rain_hold' || m.category === 'not_needed' ? null : m.reason;
    const key = `${m.category}|${reason ?? ''}`;
    const g = groups.get(key) ?? { category: m.category, reason, n: 0 };
    g.n++;
    groups.set(key, g);
  }
  const parts = [...groups.values()]
    .sort((a, b) => b.n - a.n)
    .map((g) => {
      const runs = plural(g.n, 'run');
      const why = g.reason ? `: ${lowerFirst(g.reason)}` : '';
      switch (g.category) {
        case 'restriction':
          return `${runs} skipped for the restriction${why}`;
        case 'rain_hold':
          return `${runs} held by rain`;
        case 'not_needed':
          return `${runs} not needed (the soil still held enough water)`;
        case 'fault':
          return `${runs} failed${why}`;
        case 'stopped':
          return `${runs} stopped early${why}`;
      }
    });
  return `${head}: ${parts.join('; ')}.`;
}

async function missedRuns(db: Db, siteId: number, from: string, to: string, tz: string): Promise<Map<number, MissedRun[]>> {
  const states = sql.join(notAsPlannedStates.map((s) => sql`${s}`), sql`, `);
  const r = await db.execute<Record<string, unknown>>(sql`
    select zr.zone_id, zr.run_id, r.program_id, p.name as program_name,
      to_char((min(zr.planned_start) at time zone ${tz})::date, 'YYYY-MM-DD') as local_date, min(zr.planned_start) as planned_start,
      (array_agg(zr.state::text order by zr.cycle))[1] as state, (array_agg(zr.reason order by zr.cycle))[1] as reason,
      count(*)::int as cycles, coalesce(sum(zr.planned_minutes), 0) as planned_minutes
    from zone_runs zr join runs r on r.id = zr.run_id left join programs p on p.id = r.program_id
    where zr.site_id = ${siteId} and zr.state::text in (${states})
      and zr.planned_start >= ${new Date(`${addDays(from, -1)}T00:00:00Z`)} and zr.planned_start < ${new Date(`${addDays(to, 2)}T00:00:00Z`)}
      and (zr.planned_start at time zone ${tz})::date between ${from}::date and ${to}::date
    group by zr.zone_id, zr.run_id, r.program_id, p.name
    order by min(zr.planned_start)`);
  const out = new Map<number, MissedRun[]>();
  for (const x of r.rows) {
    const z = Number(x.zone_id);
    if (!out.has(z)) out.set(z, []);
    out.get(z)!.push({
      runId: Number(x.run_id),
      programId: numOrNull(x.program_id),
      programName: (x.program_name as string | null) ?? null,
      localDate: String(x.local_date),
      plannedStart: iso(x.planned_start as Date)!,
      state: x.state as ZoneRunState,
      category: CATEGORY[String(x.state)],
      reason: (x.reason as string | null) ?? null,
      cycles: Number(x.cycles),
      plannedMinutes: round(Number(x.planned_minutes), 2),
    });
  }
  return out;
}

/**
 * The dry-spell review of a site over [from, to] (default the last 30 days): per zone, plant
 * demand, effective rain, water applied, the share of demand met, the soil-water depletion day
 * by day (FAO-56 balance with the water applied, warmed up over the BALANCE_DAYS before the
 * period exactly as the scheduler does), and every run that did not go as planned.
 */
export async function siteReview(ctx: Ctx, siteId: number, q: { from?: string; to?: string }) {
  const site = await loadVisibleSite(ctx, siteId);
  const to = q.to ?? todayAt(ctx.now, site.timezone);
  const from = q.from ?? addDays(to, -(REVIEW_DEFAULT_DAYS - 1));
  if (from > to) throw badRequest('“from” must not be after “to”');
  if (daysBetween(from, to) + 1 > REVIEW_MAX_DAYS) throw badRequest(`A review covers at most ${REVIEW_MAX_DAYS} days`);
  const warmFrom = addDays(from, -BALANCE_DAYS);
  const [zones, wx, use, missed] = await Promise.all([
    siteZones(ctx.db, site.id),
    siteWeather(ctx.db, site.id, warmFrom, to),
    siteDailyUse(ctx.db, site.id, warmFrom, to),
    missedRuns(ctx.db, site.id, from, to, site.timezone),
  ]);
  const period = dateRange(from, to);
  const warm = dateRange(warmFrom, addDays(from, -1)).filter((d) => wx.has(d));
  const withWx = period.filter((d) => wx.has(d));

  const zoneOut = zones.map((z: ZoneFacts) => {
    const u = use.get(z.id);
    const netMm = (d: string) => ((u?.get(d)?.litres ?? 0) / z.areaM2) * z.efficiency;
    const days = [...warm, ...withWx];
    const balance = days.length
      ? soilWaterBalance(
          days.map((d) => ({ et0Mm: wx.get(d)!.et0Mm, rainMm: wx.get(d)!.rainMm, irrigationMm: netMm(d), month: Number(d.slice(5, 7)) })),
          { plantType: z.plantType, soil: z.soilTexture, rootDepthM: z.rootDepthM, latitudeDeg: site.latitude },
        )
      : [];
    const shown = balance.slice(warm.length);
    const depletion: DepletionDay[] = shown.map((b, i) => {
      const d = withWx[i];
      return {
        date: d,
        et0Mm: round(wx.get(d)!.et0Mm, 2),
        kc: b.kc,
        etcMm: round(b.etcMm, 2),
        rainMm: round(wx.get(d)!.rainMm, 2),
        effectiveRainMm: round(b.effectiveRainMm, 2),
        irrigationMm: round(b.irrigationMm, 2),
        depletionMm: round(b.depletionMm, 2),
        rawMm: round(b.rawMm, 2),
        needsWater: b.needsWater,
      };
    });
    let litres = 0, measured = 0, estimated = 0, runs = 0;
    for (const d of period) {
      const x = u?.get(d);
      if (!x) continue;
      litres += x.litres;
      measured += x.measuredLitres;
      estimated += x.estimatedLitres;
      runs += x.runs;
    }
    const demand = shown.reduce((t, b) => t + b.etcMm, 0);
    const eff = shown.reduce((t, b) => t + b.effectiveRainMm, 0);
    const appliedMm = litres / z.areaM2;
    const appliedNetMm = period.reduce((t, d) => t + netMm(d), 0);
    const metNet = eff + shown.reduce((t, b) => t + b.irrigationMm, 0);
    const demandMetPct = shown.length && demand > 0 ? Math.round((metNet / demand) * 100) : null;
    const miss = missed.get(z.id) ?? [];
    const counts: Record<MissCategory, number> = { rain_hold: 0, restriction: 0, not_needed: 0, fault: 0, stopped: 0 };
    for (const m of miss) counts[m.category]++;
    return {
      zoneId: z.id,
      name: z.name,
      plantType: z.plantType,
      areaM2: z.areaM2,
      efficiency: z.efficiency,
      hasFlowSensor: z.hasFlowSensor,
      demandMm: shown.length ? round(demand, 1) : null,
      rainMm: round(withWx.reduce((t, d) => t + wx.get(d)!.rainMm, 0), 1),
      effectiveRainMm: round(eff, 1),
      litres: round(litres, 1),
      litresBasis: basisOf(measured, estimated, runs),
      appliedMm: round(appliedMm, 1),
      appliedNetMm: round(appliedNetMm, 1),
      demandMetPct,
      tawMm: round(totalAvailableWater(z.soilTexture, z.rootDepthM), 1),
      stressDays: shown.filter((b) => b.needsWater).length,
      finalDepletionMm: shown.length ? round(shown[shown.length - 1].depletionMm, 1) : null,
      maxDepletionMm: shown.length ? round(Math.max(...shown.map((b) => b.depletionMm)), 1) : null,
      depletion,
      notAsPlanned: miss,
      counts,
      summary: summaryLine(z.name, demandMetPct, miss),
    };
  });

  return {
    site: { id: site.id, name: site.name, timezone: site.timezone },
    from,
    to,
    days: period.length,
    weatherDays: withWx.length,
    missingWeatherDays: period.filter((d) => !wx.has(d)),
    warmUpDays: warm.length,
    summary: zoneOut.map((z) => z.summary),
    zones: zoneOut,
  };
}
