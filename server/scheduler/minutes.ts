import { and, eq, gte, inArray, lte } from 'drizzle-orm';
import { DateTime } from 'luxon';
import type { Db } from '../db/client';
import { weatherDays, zoneRuns, type Program, type ProgramZone, type Site, type Zone } from '../db/schema/index';
import { readilyAvailableWater, soilProperties, soilWaterBalance, totalAvailableWater, wateringNeed, DEPLETION_FRACTION } from '../domain/agronomy';
import { cycleAndSoak, precipitationRate } from '../domain/hydraulics';

export type ZoneMinutes = { minutes: number; cycles: number[]; soakMinutes: number; skip?: string; detail?: Record<string, number> };

/** Days of weather looked back over for the soil-water balance. */
export const BALANCE_DAYS = 30;

/** Split minutes into cycles and soak by the program zone's setting. */
export function splitCycles(pz: Pick<ProgramZone, 'cycleSoak' | 'cycleMinutes' | 'soakMinutes'>, zone: Zone, minutes: number): { cycles: number[]; soakMinutes: number } {
  if (minutes <= 0) return { cycles: [], soakMinutes: 0 };
  if (pz.cycleSoak === 'manual' && pz.cycleMinutes && pz.cycleMinutes > 0) {
    const n = Math.ceil(minutes / pz.cycleMinutes - 1e-9);
    const cycles = Array.from({ length: n }, (_, i) => (i < n - 1 ? pz.cycleMinutes! : Math.round((minutes - pz.cycleMinutes! * (n - 1)) * 100) / 100));
    return { cycles, soakMinutes: pz.soakMinutes ?? 0 };
  }
  if (pz.cycleSoak === 'auto') {
    const pr = precipitationRate(zone.headCount * zone.flowPerHeadLpm, zone.areaM2);
    const r = cycleAndSoak({ totalMinutes: minutes, precipitationRateMmH: pr, intakeRateMmH: soilProperties(zone.soilTexture).intakeRateMmH, maxCycles: 6 });
    return { cycles: r.cycles, soakMinutes: r.soakMinutes };
  }
  return { cycles: [minutes], soakMinutes: 0 };
}

/**
 * A zone's soil-water depletion today from stored weather and the water Runnel applied:
 * FAO-56 daily balance (Eq. 85), starting full BALANCE_DAYS ago.
 */
export async function zoneDepletion(db: Db, site: Site, zone: Zone, nowMs: number) {
  const today = DateTime.fromMillis(nowMs, { zone: site.timezone }).startOf('day');
  const from = today.minus({ days: BALANCE_DAYS }).toISODate()!;
  const to = today.minus({ days: 1 }).toISODate()!;
  const wx = await db
    .select({ date: weatherDays.date, et0Mm: weatherDays.et0Mm, rainMm: weatherDays.rainMm })
    .from(weatherDays)
    .where(and(eq(weatherDays.siteId, site.id), gte(weatherDays.date, from), lte(weatherDays.date, to)))
    .orderBy(weatherDays.date);
  const applied = await db
    .select({ start: zoneRuns.actualStart, minutes: zoneRuns.actualMinutes })
    .from(zoneRuns)
    .where(and(eq(zoneRuns.zoneId, zone.id), inArray(zoneRuns.state, ['completed', 'stopped']), gte(zoneRuns.plannedStart, today.minus({ days: BALANCE_DAYS }).toJSDate())));
  const pr = precipitationRate(zone.headCount * zone.flowPerHeadLpm, zone.areaM2);
  const mmByDate = new Map<string, number>();
  for (const a of applied) {
    if (!a.start || !a.minutes) continue;
    const d = DateTime.fromJSDate(a.start, { zone: site.timezone }).toISODate()!;
    mmByDate.set(d, (mmByDate.get(d) ?? 0) + (pr * a.minutes) / 60 * zone.efficiency);
  }
  const days = wx.map((w) => ({ et0Mm: w.et0Mm, rainMm: w.rainMm, irrigationMm: mmByDate.get(w.date) ?? 0, month: Number(w.date.slice(5, 7)) }));
  const balance = days.length
    ? soilWaterBalance(days, { plantType: zone.plantType, soil: zone.soilTexture, rootDepthM: zone.rootDepthM, latitudeDeg: site.latitude })
    : [];
  const last = balance[balance.length - 1];
  const taw = totalAvailableWater(zone.soilTexture, zone.rootDepthM);
  const raw = last?.rawMm ?? readilyAvailableWater(taw, DEPLETION_FRACTION[zone.plantType]);
  return { depletionMm: last?.depletionMm ?? 0, rawMm: raw, tawMm: taw, days: balance.length, precipitationRateMmH: pr };
}

/** How long this zone runs in this occurrence, split into cycles; `skip` when it should not run. */
export async function zoneMinutes(db: Db, program: Program, pz: ProgramZone, zone: Zone, site: Site, nowMs: number): Promise<ZoneMinutes> {
  if (program.mode === 'fixed') return { minutes: pz.minutes, ...splitCycles(pz, zone, pz.minutes) };
  if (program.mode === 'seasonal') {
    const m = Math.round(pz.minutes * program.seasonalPct) / 100;
    return { minutes: m, ...splitCycles(pz, zone, m) };
  }
  const d = await zoneDepletion(db, site, zone, nowMs);
  if (d.days === 0) return { minutes: pz.minutes, ...splitCycles(pz, zone, pz.minutes), detail: { noWeather: 1 } };
  if (d.depletionMm < d.rawMm) {
    return {
      minutes: 0, cycles: [], soakMinutes: 0,
      skip: `Not needed yet: the soil has used ${d.depletionMm.toFixed(1)} mm of the ${d.rawMm.toFixed(1)} mm the plants can easily take up`,
      detail: d,
    };
  }
  const need = wateringNeed({ depletionMm: d.depletionMm, precipitationRateMmH: d.precipitationRateMmH, efficiency: zone.efficiency, soil: zone.soilTexture, maxCycles: 6 });
  const minutes = Math.round(need.minutes * 100) / 100;
  if (pz.cycleSoak === 'auto') return { minutes, cycles: need.cycles, soakMinutes: need.soakMinutes, detail: d };
  return { minutes, ...splitCycles(pz, zone, minutes), detail: d };
}
