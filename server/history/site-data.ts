import { sql } from 'drizzle-orm';
import type { Db } from '../db/client';
import type { Site } from '../db/schema/index';
import { effectiveRain, plantCoefficient, type PlantType, type SoilTexture } from '../domain/agronomy';
import { notFound } from '../errors';

/** What the history computations need to know of a zone. */
export type ZoneFacts = {
  id: number;
  name: string;
  controllerId: number;
  relay: number;
  areaM2: number;
  plantType: PlantType;
  soilTexture: SoilTexture;
  rootDepthM: number;
  efficiency: number;
  nominalFlowLpm: number;
  hasFlowSensor: boolean;
};

export async function siteZones(db: Db, siteId: number, zoneId?: number): Promise<ZoneFacts[]> {
  const r = await db.execute<Record<string, unknown>>(sql`
    select z.id, z.name, z.controller_id, z.relay, z.area_m2, z.plant_type, z.soil_texture, z.root_depth_m, z.efficiency,
      z.head_count * z.flow_per_head_lpm as nominal_flow, c.has_flow_sensor
    from zones z join controllers c on c.id = z.controller_id
    where c.site_id = ${siteId} ${zoneId !== undefined ? sql`and z.id = ${zoneId}` : sql``}
    order by c.name, z.relay`);
  const zs = r.rows.map((x) => ({
    id: Number(x.id),
    name: String(x.name),
    controllerId: Number(x.controller_id),
    relay: Number(x.relay),
    areaM2: Number(x.area_m2),
    plantType: x.plant_type as PlantType,
    soilTexture: x.soil_texture as SoilTexture,
    rootDepthM: Number(x.root_depth_m),
    efficiency: Number(x.efficiency),
    nominalFlowLpm: Number(x.nominal_flow),
    hasFlowSensor: Boolean(x.has_flow_sensor),
  }));
  if (zoneId !== undefined && zs.length === 0) throw notFound('Zone');
  return zs;
}

export type WeatherFacts = { et0Mm: number; rainMm: number; effectiveRainMm: number };

/** The site's stored weather in [from, to], by local date. */
export async function siteWeather(db: Db, siteId: number, from: string, to: string): Promise<Map<string, WeatherFacts>> {
  const r = await db.execute<{ date: string; et0_mm: number; rain_mm: number }>(sql`
    select to_char(date, 'YYYY-MM-DD') as date, et0_mm, rain_mm from weather_days
    where site_id = ${siteId} and date between ${from}::date and ${to}::date order by date`);
  return new Map(r.rows.map((w) => [w.date, { et0Mm: Number(w.et0_mm), rainMm: Number(w.rain_mm), effectiveRainMm: effectiveRain(Number(w.rain_mm)) }]));
}

/** Plant demand of a zone on a day, mm: ET₀ × the plant coefficient of its month (hemisphere-aware). */
export function zoneDemandMm(zone: Pick<ZoneFacts, 'plantType'>, site: Pick<Site, 'latitude'>, date: string, et0Mm: number): number {
  const month = Number(date.slice(5, 7));
  const key = `${zone.plantType}|${month}|${site.latitude < 0 ? 's' : 'n'}`;
  let kc = kcCache.get(key);
  if (kc === undefined) kcCache.set(key, (kc = plantCoefficient(zone.plantType, month, site.latitude)));
  return et0Mm * kc;
}
const kcCache = new Map<string, number>();

export type DayUse = { litres: number; measuredLitres: number; estimatedLitres: number; runs: number; minutes: number; notAsPlanned: number };

/** The daily rollup rows of a site in [from, to]: zone id → date → use. */
export async function siteDailyUse(db: Db, siteId: number, from: string, to: string, zoneId?: number): Promise<Map<number, Map<string, DayUse>>> {
  const r = await db.execute<Record<string, unknown>>(sql`
    select zone_id, to_char(date, 'YYYY-MM-DD') as date, litres, measured_litres, estimated_litres, runs, minutes, not_as_planned
    from water_use_daily
    where site_id = ${siteId} and date between ${from}::date and ${to}::date ${zoneId !== undefined ? sql`and zone_id = ${zoneId}` : sql``}`);
  const out = new Map<number, Map<string, DayUse>>();
  for (const x of r.rows) {
    const z = Number(x.zone_id);
    if (!out.has(z)) out.set(z, new Map());
    out.get(z)!.set(String(x.date), {
      litres: Number(x.litres),
      measuredLitres: Number(x.measured_litres),
      estimatedLitres: Number(x.estimated_litres),
      runs: Number(x.runs),
      minutes: Number(x.minutes),
      notAsPlanned: Number(x.not_as_planned),
    });
  }
  return out;
}
