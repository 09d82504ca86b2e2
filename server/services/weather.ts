import { and, asc, eq, gte, lte, sql } from 'drizzle-orm';
import { DateTime } from 'luxon';
import { inTx, type Db } from '../db/client';
import { weatherDays, type Site, type WeatherDay } from '../db/schema/index';
import {
  weatherDayInputSchema,
  weatherRangeQuery,
  type WeatherSource,
} from '../contracts/weather';
import { parse } from '../middleware/validate';
import { AppError, forbidden, notFound } from '../errors';
import { DomainInputError } from '../domain/errors';
import type { Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleSite } from './sites';
import { round } from './views';
import { computeEt0, type Et0Result, type WeatherValues } from './et0';
import { dayNumber, isoFromDayNumber } from '../weather/generator';

export type Ctx = { db: Db; actor: Actor; now?: () => number };

export { computeEt0, type Et0Result, type WeatherValues } from './et0';

/** Domain input names → the API's field names. */
export const DOMAIN_FIELD: Record<string, keyof WeatherValues | 'date' | 'site.latitude' | 'site.elevationM'> = {
  tmaxC: 'tmaxC',
  tminC: 'tminC',
  rhMaxPct: 'rhMaxPct',
  rhMinPct: 'rhMinPct',
  windSpeedMs: 'windMs',
  windHeightM: 'windHeightM',
  sunshineHours: 'sunshineH',
  solarRadiationMJ: 'solarMj',
  latitudeDeg: 'site.latitude',
  elevationM: 'site.elevationM',
  dayOfYear: 'date',
};

/** A domain error as the one 400 shape, naming the API field. */
export function domainError(e: DomainInputError) {
  const path = DOMAIN_FIELD[e.field] ?? e.field;
  return new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path, message: e.message }]);
}

export function weatherDayView(d: WeatherDay) {
  const [humidity, radiation, wind] = d.et0Method.split('/');
  return {
    siteId: d.siteId,
    date: d.date,
    tmaxC: d.tmaxC,
    tminC: d.tminC,
    rhMaxPct: d.rhMaxPct,
    rhMinPct: d.rhMinPct,
    windMs: d.windMs,
    windHeightM: d.windHeightM,
    sunshineH: d.sunshineH,
    solarMj: d.solarMj,
    rainMm: d.rainMm,
    et0Mm: round(d.et0Mm, 2),
    et0Method: d.et0Method,
    /** Which FAO-56 fallbacks were used: humidity from Tmin, radiation from the temperature range, wind 2 m/s. */
    et0Fallbacks: [
      ...(humidity === 'tmin' ? ['humidity_from_tmin'] : []),
      ...(radiation === 'temperature_range' ? ['radiation_from_temperature_range'] : []),
      ...(wind === 'wind_assumed' ? ['wind_assumed_2ms'] : []),
    ],
    source: d.source,
    updatedAt: d.updatedAt,
  };
}
export type WeatherDayView = ReturnType<typeof weatherDayView>;

/** Today's calendar date where the site is. */
export function siteToday(site: Pick<Site, 'timezone'>, nowMs: number): string {
  return DateTime.fromMillis(nowMs, { zone: site.timezone }).toISODate() ?? DateTime.fromMillis(nowMs).toISODate()!;
}

export const addDays = (iso: string, n: number) => isoFromDayNumber(dayNumber(iso) + n);
export const daysBetween = (from: string, to: string) => dayNumber(to) - dayNumber(from) + 1;

const WRITERS = new Set(['admin', 'manager', 'technician']);

/** The site, if the actor may see it (else 404) and may record weather there (else 403). */
export async function loadWritableSite(ctx: Ctx, siteId: number) {
  const site = await loadVisibleSite(ctx, siteId);
  if (!WRITERS.has(ctx.actor.role)) throw forbidden('Only an admin, manager or technician may record weather');
  return site;
}

export function checkNotFuture(site: Site, date: string, nowMs: number, path = 'date') {
  const today = siteToday(site, nowMs);
  if (date > today) {
    throw new AppError(400, 'validation_failed', 'Some fields are not valid', [
      { path, message: `Weather can be recorded for ${today} (today at the site) or earlier` },
    ]);
  }
}

export type DayToStore = WeatherValues & Et0Result & { date: string; source: WeatherSource };

/**
 * Insert or replace days by (site, date), in batches. With onlyOverSource, an existing day
 * is replaced only when it came from that source. Returns the rows written.
 */
export async function upsertDays(db: Db, siteId: number, days: DayToStore[], onlyOverSource?: WeatherSource) {
  const written: WeatherDay[] = [];
  for (let i = 0; i < days.length; i += 1000) {
    const batch = days.slice(i, i + 1000).map((d) => ({ ...d, siteId }));
    const set = {
      tmaxC: sql`excluded.tmax_c`,
      tminC: sql`excluded.tmin_c`,
      rhMaxPct: sql`excluded.rh_max_pct`,
      rhMinPct: sql`excluded.rh_min_pct`,
      windMs: sql`excluded.wind_ms`,
      windHeightM: sql`excluded.wind_height_m`,
      sunshineH: sql`excluded.sunshine_h`,
      solarMj: sql`excluded.solar_mj`,
      rainMm: sql`excluded.rain_mm`,
      et0Mm: sql`excluded.et0_mm`,
      et0Method: sql`excluded.et0_method`,
      source: sql`excluded.source`,
      updatedAt: sql`now()`,
    };
    const rows = await db
      .insert(weatherDays)
      .values(batch)
      .onConflictDoUpdate({
        target: [weatherDays.siteId, weatherDays.date],
        set,
        setWhere: onlyOverSource ? eq(weatherDays.source, onlyOverSource) : undefined,
      })
      .returning();
    written.push(...rows);
  }
  return written;
}

export async function listWeather(ctx: Ctx, siteId: number, rawQuery: unknown) {
  const site = await loadVisibleSite(ctx, siteId);
  const q = parse(weatherRangeQuery, rawQuery);
  const to = q.to ?? (q.from ? addDays(q.from, 29) : siteToday(site, (ctx.now ?? Date.now)()));
  const from = q.from ?? addDays(to, -29);
  if (daysBetween(from, to) > 731) {
    throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: 'to', message: 'Ask for at most 731 days at once' }]);
  }
  const rows = await ctx.db
    .select()
    .from(weatherDays)
    .where(and(eq(weatherDays.siteId, siteId), gte(weatherDays.date, from), lte(weatherDays.date, to)))
    .orderBy(asc(weatherDays.date));
  return { from, to, items: rows.map(weatherDayView) };
}

/** Save one typed-in day (replacing any stored day of that date) with ET₀ computed. */
export async function saveWeatherDay(ctx: Ctx, siteId: number, date: string, raw: unknown) {
  const site = await loadWritableSite(ctx, siteId);
  const input = parse(weatherDayInputSchema, raw);
  checkNotFuture(site, date, (ctx.now ?? Date.now)());
  let et0: Et0Result;
  try {
    et0 = computeEt0(site, date, input);
  } catch (e) {
    if (e instanceof DomainInputError) throw domainError(e);
    throw e;
  }
  return inTx(ctx.db, async (tx) => {
    const [before] = await tx.select().from(weatherDays).where(and(eq(weatherDays.siteId, siteId), eq(weatherDays.date, date)));
    const [row] = await upsertDays(tx, siteId, [{ ...input, ...et0, date, source: 'manual' }]);
    await recordAudit(tx, ctx.actor, {
      action: 'weather.save', entityType: 'weather_day', entityId: `${siteId}:${date}`, siteId, before: before ?? null, after: row,
    });
    return { ...weatherDayView(row), created: !before };
  });
}

export async function deleteWeatherDay(ctx: Ctx, siteId: number, date: string) {
  await loadWritableSite(ctx, siteId);
  await inTx(ctx.db, async (tx) => {
    const [before] = await tx
      .delete(weatherDays)
      .where(and(eq(weatherDays.siteId, siteId), eq(weatherDays.date, date)))
      .returning();
    if (!before) throw notFound('Weather day');
    await recordAudit(tx, ctx.actor, {
      action: 'weather.delete', entityType: 'weather_day', entityId: `${siteId}:${date}`, siteId, before,
    });
  });
}
