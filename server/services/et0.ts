/**
 * ET₀ of stored weather days: computed on write from the day's measurements and the site's
 * location, and computed again when the site's location changes (latitude, elevation or the
 * coastal flag; longitude is not an input of the daily FAO-56 equations).
 *
 * Apart from services/weather.ts so the site service can use it without an import cycle
 * (weather.ts loads sites through services/sites.ts).
 */
import { and, eq, sql } from 'drizzle-orm';
import type { Db } from '../db/client';
import { weatherDays, type Site } from '../db/schema/index';
import { dayOfYear, referenceEt0Details, type HumiditySource, type RadiationSource } from '../domain/agronomy';
import { DomainInputError } from '../domain/errors';
import { AppError } from '../errors';

/** The measured values of a day, metric; null where not measured. */
export type WeatherValues = {
  tmaxC: number;
  tminC: number;
  rhMaxPct: number | null;
  rhMinPct: number | null;
  windMs: number | null;
  windHeightM: number | null;
  sunshineH: number | null;
  solarMj: number | null;
  rainMm: number;
};

export type Et0Result = { et0Mm: number; et0Method: string };

/** The site fields the computation reads. */
export type Et0Site = Pick<Site, 'latitude' | 'elevationM' | 'coastal'>;
const ET0_SITE_FIELDS = ['latitude', 'elevationM', 'coastal'] as const satisfies readonly (keyof Et0Site)[];

const un = (v: number | null) => (v === null ? undefined : v);

/**
 * ET₀ of a day at a site (FAO-56 Penman–Monteith via referenceEt0Details, with FAO-56's
 * fallbacks for missing humidity, radiation and wind). A coastal site estimates radiation
 * from the temperature range with kRs 0.19 instead of 0.16 (Eq. 50). et0Method records the
 * data path: "<humidity>/<radiation>/<wind>", e.g. "rh_max_min/sunshine/wind_measured" or
 * "tmin/temperature_range/wind_assumed". Throws DomainInputError for impossible data.
 */
export function computeEt0(site: Et0Site, date: string, v: WeatherValues): Et0Result {
  const d = referenceEt0Details({
    tmaxC: v.tmaxC,
    tminC: v.tminC,
    rhMaxPct: un(v.rhMaxPct),
    rhMinPct: un(v.rhMinPct),
    windSpeedMs: un(v.windMs),
    windHeightM: un(v.windHeightM),
    sunshineHours: un(v.sunshineH),
    solarRadiationMJ: un(v.solarMj),
    latitudeDeg: site.latitude,
    elevationM: site.elevationM,
    dayOfYear: dayOfYear(date),
    coastal: site.coastal,
  });
  return { et0Mm: d.et0, et0Method: `${d.humiditySource}/${d.radiationSource}/${d.windAssumed ? 'wind_assumed' : 'wind_measured'}` };
}

// Records, so a new data path in the domain fails the typecheck here until it is listed.
const HUMIDITY: Record<HumiditySource, true> = { vapour_pressure: true, rh_max_min: true, rh_max: true, tmin: true };
const RADIATION: Record<RadiationSource, true> = { measured: true, sunshine: true, temperature_range: true };
const WIND = { wind_measured: true, wind_assumed: true };

/**
 * True when a stored day's ET₀ was computed by Runnel (computeEt0 wrote its method). Every
 * write path of the app (form, CSV, weather service, demo seed) computes ET₀ this way; a row
 * whose method is anything else carries an ET₀ given from outside and is never recomputed.
 */
export function isComputedEt0Method(method: string): boolean {
  const parts = method.split('/');
  return parts.length === 3 && Object.hasOwn(HUMIDITY, parts[0]) && Object.hasOwn(RADIATION, parts[1]) && Object.hasOwn(WIND, parts[2]);
}

/** Whether changing `before` to `after` changes an input of computeEt0. */
export function et0InputsChanged(before: Et0Site, after: Et0Site): boolean {
  return ET0_SITE_FIELDS.some((k) => before[k] !== after[k]);
}

/** The site's API field a domain input stands for. */
const SITE_FIELD: Record<string, string> = { latitudeDeg: 'latitude', elevationM: 'elevationM', coastal: 'coastal' };

/**
 * Compute again the ET₀ of every stored day of the site that Runnel computed, with the site as
 * it is now, and store the ones that changed. Meant to run in the transaction that changed the
 * site. Returns how many days changed. A day that cannot be computed at the new location is a
 * 400 naming the site field (the caller's transaction then changes nothing).
 */
export async function recomputeSiteEt0(tx: Db, siteId: number, site: Et0Site): Promise<number> {
  const days = await tx
    .select()
    .from(weatherDays)
    .where(eq(weatherDays.siteId, siteId))
    .for('update');
  const changed: { date: string; et0Mm: number; et0Method: string }[] = [];
  for (const d of days) {
    if (!isComputedEt0Method(d.et0Method)) continue;
    let et0: Et0Result;
    try {
      et0 = computeEt0(site, d.date, d);
    } catch (e) {
      if (!(e instanceof DomainInputError)) throw e;
      const path = SITE_FIELD[e.field] ?? 'latitude';
      throw new AppError(400, 'validation_failed', 'Some fields are not valid', [
        { path, message: `The stored weather of ${d.date} cannot be computed at this location: ${e.message}` },
      ]);
    }
    if (et0.et0Mm !== d.et0Mm || et0.et0Method !== d.et0Method) changed.push({ date: d.date, ...et0 });
  }
  for (let i = 0; i < changed.length; i += 1000) {
    const batch = changed.slice(i, i + 1000);
    await tx.execute(sql`
      update ${weatherDays} set et0_mm = v.et0_mm, et0_method = v.et0_method, updated_at = now()
      from unnest(${sql.param(batch.map((b) => b.date))}::date[], ${sql.param(batch.map((b) => b.et0Mm))}::float8[], ${sql.param(batch.map((b) => b.et0Method))}::text[])
        as v(date, et0_mm, et0_method)
      where ${and(eq(weatherDays.siteId, siteId), sql`${weatherDays.date} = v.date`)}`);
  }
  return changed.length;
}
