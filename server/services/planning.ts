/**
 * Read-only planning figures, all computed by server/domain: zones against the supply and a
 * pipe, grouping heads into zones, and the watering need from stored weather.
 */
import { and, asc, eq, gte, isNull, lte } from 'drizzle-orm';
import type { Db } from '../db/client';
import { controllers, weatherDays, zones } from '../db/schema/index';
import { groupHeadsSchema, planningQuery, type PlanningQuery } from '../contracts/supply';
import { wateringNeedQuery } from '../contracts/weather';
import { parse } from '../middleware/validate';
import { AppError } from '../errors';
import { DomainInputError } from '../domain/errors';
import {
  groupHeadsIntoZones,
  hazenWilliamsLoss,
  headLossKPa,
  maxHeadsPerZone,
  pipeVelocity,
  precipitationRate,
  usableSupply,
  zoneFlow,
  zoneWarnings,
  type HeadType,
} from '../domain/hydraulics';
import { soilProperties, soilWaterBalance, totalAvailableWater, wateringNeed } from '../domain/agronomy';
import type { Actor } from './actor';
import { loadVisibleSite } from './sites';
import { round } from './views';
import { addDays, siteToday } from './weather';
import { datesBetween } from '../weather/generator';

type Ctx = { db: Db; actor: Actor; now?: () => number };

/** Zones on the site's working (not retired) controllers, in controller and relay order. */
async function siteZones(db: Db, siteId: number) {
  return db
    .select({ zone: zones, controllerName: controllers.name })
    .from(zones)
    .innerJoin(controllers, eq(zones.controllerId, controllers.id))
    .where(and(eq(controllers.siteId, siteId), isNull(controllers.retiredAt)))
    .orderBy(asc(controllers.name), asc(zones.controllerId), asc(zones.relay));
}

/** Pipe inputs of the domain library → the planning query's names. */
const PIPE_FIELD: Record<string, string> = { innerDiameterMm: 'pipeMm', lengthM: 'pipeLengthM', c: 'c' };

/** Head types on a zone: its own, and another found on the same valve. */
const zoneHeadTypes = (z: { headType: HeadType; otherHeadType: HeadType | null }): HeadType[] =>
  z.otherHeadType ? [z.headType, z.otherHeadType] : [z.headType];

export async function sitePlanning(ctx: Ctx, siteId: number, rawQuery: unknown) {
  const site = await loadVisibleSite(ctx, siteId);
  const pipe = parse(planningQuery, rawQuery);
  const rows = await siteZones(ctx.db, siteId);
  try {
    return planZones(site, pipe, rows);
  } catch (e) {
    // A pipe too extreme to compute with (say a bore of 1e-300 mm) is the query's fault.
    if (e instanceof DomainInputError) {
      throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: PIPE_FIELD[e.field] ?? e.field, message: e.message }]);
    }
    throw e;
  }
}

function planZones(
  site: Awaited<ReturnType<typeof loadVisibleSite>>,
  pipe: PlanningQuery,
  rows: Awaited<ReturnType<typeof siteZones>>,
) {
  const usable = usableSupply(site.supplyFlowLpm, site.supplyMarginPct);
  return {
    site: {
      id: site.id,
      name: site.name,
      supplyFlowLpm: site.supplyFlowLpm,
      supplyMarginPct: site.supplyMarginPct,
      usableSupplyLpm: round(usable, 2),
      staticPressureKPa: site.staticPressureKPa,
    },
    pipe: { innerDiameterMm: pipe.pipeMm, lengthM: pipe.pipeLengthM, c: pipe.c },
    zones: rows.map(({ zone: z, controllerName }) => {
      const flow = zoneFlow(z.headCount, z.flowPerHeadLpm);
      const maxHeads = maxHeadsPerZone(site.supplyFlowLpm, z.flowPerHeadLpm, site.supplyMarginPct);
      const lossM = hazenWilliamsLoss(flow, pipe.pipeMm, pipe.pipeLengthM, pipe.c);
      return {
        id: z.id,
        name: z.name,
        controllerId: z.controllerId,
        controllerName,
        relay: z.relay,
        headType: z.headType,
        otherHeadType: z.otherHeadType,
        headCount: z.headCount,
        flowPerHeadLpm: z.flowPerHeadLpm,
        areaM2: z.areaM2,
        flowLpm: round(flow, 2),
        maxHeadsPerZone: maxHeads,
        /** Heads beyond what the usable supply allows (0 when within). */
        headsOverLimit: Math.max(0, z.headCount - maxHeads),
        precipitationRateMmH: round(precipitationRate(flow, z.areaM2), 2),
        pipeVelocityMs: round(pipeVelocity(flow, pipe.pipeMm), 3),
        frictionLossM: round(lossM, 3),
        frictionLossKPa: round(headLossKPa(lossM), 2),
        warnings: zoneWarnings({
          flowLpm: flow,
          headTypes: zoneHeadTypes(z),
          supplyLpm: site.supplyFlowLpm,
          marginPct: site.supplyMarginPct,
          innerDiameterMm: pipe.pipeMm,
        }),
      };
    }),
  };
}

/** Domain paths such as heads[3].flowLpm → heads.3.flowLpm, as zod writes them. */
const zodPath = (field: string) => field.replace(/\[(\d+)\]/g, '.$1');

export function groupHeads(raw: unknown) {
  const input = parse(groupHeadsSchema, raw);
  try {
    const proposed = groupHeadsIntoZones(input.heads, input.supplyLpm, input.marginPct);
    return {
      usableSupplyLpm: round(usableSupply(input.supplyLpm, input.marginPct), 2),
      zoneCount: proposed.length,
      zones: proposed.map((z) => ({ headType: z.headType, headIds: z.headIds, headCount: z.headIds.length, flowLpm: round(z.flowLpm, 2) })),
    };
  } catch (e) {
    if (e instanceof DomainInputError) {
      throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: zodPath(e.field), message: e.message }]);
    }
    throw e;
  }
}

const sum = (xs: number[]) => xs.reduce((a, b) => a + b, 0);

/**
 * Per zone, over the last N days of stored weather: ET₀, plant demand (ET₀ × Kc of each
 * day's month), effective rain, the root-zone depletion from a daily soil-water balance
 * that starts at field capacity with no irrigation, and the minutes and cycles that would
 * replace it. Days without stored weather are left out and listed.
 */
export async function wateringNeedForSite(ctx: Ctx, siteId: number, rawQuery: unknown) {
  const site = await loadVisibleSite(ctx, siteId);
  const q = parse(wateringNeedQuery, rawQuery);
  const to = q.to ?? siteToday(site, (ctx.now ?? Date.now)());
  const from = addDays(to, -(q.days - 1));
  const weather = await ctx.db
    .select({ date: weatherDays.date, et0Mm: weatherDays.et0Mm, rainMm: weatherDays.rainMm })
    .from(weatherDays)
    .where(and(eq(weatherDays.siteId, siteId), gte(weatherDays.date, from), lte(weatherDays.date, to)))
    .orderBy(asc(weatherDays.date));
  const stored = new Set(weather.map((w) => w.date));
  const days = weather.map((w) => ({ et0Mm: w.et0Mm, rainMm: w.rainMm, irrigationMm: 0, month: Number(w.date.slice(5, 7)) }));
  const et0Sum = sum(weather.map((w) => w.et0Mm));
  const rainSum = sum(weather.map((w) => w.rainMm));

  const rows = await siteZones(ctx.db, siteId);
  const zoneNeeds = rows.map(({ zone: z, controllerName }) => {
    const pr = precipitationRate(zoneFlow(z.headCount, z.flowPerHeadLpm), z.areaM2);
    const balance = soilWaterBalance(days, {
      plantType: z.plantType,
      soil: z.soilTexture,
      rootDepthM: z.rootDepthM,
      latitudeDeg: site.latitude,
      initialDepletionMm: 0,
    });
    const last = balance[balance.length - 1];
    const depletion = last?.depletionMm ?? 0;
    const need = wateringNeed({ depletionMm: depletion, precipitationRateMmH: pr, efficiency: z.efficiency, soil: z.soilTexture });
    const demand = sum(balance.map((b) => b.etcMm));
    return {
      id: z.id,
      name: z.name,
      controllerId: z.controllerId,
      controllerName,
      relay: z.relay,
      plantType: z.plantType,
      soilTexture: z.soilTexture,
      headType: z.headType,
      otherHeadType: z.otherHeadType,
      precipitationRateMmH: round(pr, 2),
      efficiency: z.efficiency,
      intakeRateMmH: soilProperties(z.soilTexture).intakeRateMmH,
      et0Mm: round(et0Sum, 2),
      /** Demand-weighted mean plant coefficient over the period (Kc of each day's month). */
      plantCoefficient: et0Sum > 0 ? round(demand / et0Sum, 3) : null,
      plantDemandMm: round(demand, 2),
      rainMm: round(rainSum, 2),
      effectiveRainMm: round(sum(balance.map((b) => b.effectiveRainMm)), 2),
      depletionMm: round(depletion, 2),
      tawMm: round(totalAvailableWater(z.soilTexture, z.rootDepthM), 2),
      rawMm: last ? round(last.rawMm, 2) : null,
      needsWater: last?.needsWater ?? false,
      netDepthMm: round(need.netDepthMm, 2),
      grossDepthMm: round(need.grossDepthMm, 2),
      minutes: round(need.minutes, 1),
      cycles: need.cycles.map((c) => round(c, 2)),
      soakMinutes: need.soakMinutes,
      runoffExpected: need.runoffExpected,
    };
  });

  return {
    site: { id: site.id, name: site.name, latitude: site.latitude },
    from,
    to,
    days: q.days,
    daysWithWeather: weather.length,
    missingDates: datesBetween(from, to).filter((d) => !stored.has(d)),
    totals: { et0Mm: round(et0Sum, 2), rainMm: round(rainSum, 2) },
    series: weather.map((w) => ({ date: w.date, et0Mm: round(w.et0Mm, 2), rainMm: w.rainMm })),
    zones: zoneNeeds,
  };
}
