/** Daily weather fetched from the weather service (docs/weather.md) and stored with ET₀. */
import { MAX_FETCH_DAYS, weatherFetchSchema } from '../contracts/weather';
import { parse } from '../middleware/validate';
import { AppError, forbidden } from '../errors';
import { DomainInputError } from '../domain/errors';
import { inTx } from '../db/client';
import { fetchDailyWeather, WeatherServiceError } from '../weather/client';
import { datesBetween } from '../weather/generator';
import { recordAudit } from './audit';
import { loadVisibleSite } from './sites';
import {
  computeEt0,
  daysBetween,
  siteToday,
  upsertDays,
  weatherDayView,
  type Ctx,
  type DayToStore,
} from './weather';

export type WeatherServiceOptions = { url: string; timeoutMs?: number; fetch?: typeof fetch };

const fieldError = (path: string, message: string) =>
  new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path, message }]);

export async function fetchSiteWeather(ctx: Ctx, siteId: number, raw: unknown, service: WeatherServiceOptions) {
  const site = await loadVisibleSite(ctx, siteId);
  if (ctx.actor.role !== 'admin' && ctx.actor.role !== 'manager') {
    throw forbidden('Only an admin or manager may fetch weather from the weather service');
  }
  const input = parse(weatherFetchSchema, raw);
  if (daysBetween(input.from, input.to) > MAX_FETCH_DAYS) throw fieldError('to', `Fetch at most ${MAX_FETCH_DAYS} days at once`);
  const today = siteToday(site, (ctx.now ?? Date.now)());
  if (input.to > today) throw fieldError('to', `The weather service gives past days only; ${today} is today at the site`);

  let days;
  try {
    days = await fetchDailyWeather(
      service.url,
      { lat: site.latitude, lon: site.longitude, from: input.from, to: input.to },
      { timeoutMs: service.timeoutMs, fetch: service.fetch },
    );
  } catch (e) {
    if (e instanceof WeatherServiceError) {
      throw new AppError(502, e.kind === 'bad_response' ? 'weather_service_bad_response' : 'weather_service_unavailable', e.message);
    }
    throw e;
  }

  const toStore: DayToStore[] = days.map((d) => {
    const values = {
      tmaxC: d.tmaxC,
      tminC: d.tminC,
      rhMaxPct: d.rhMaxPct ?? null,
      rhMinPct: d.rhMinPct ?? null,
      windMs: d.windMs ?? null,
      windHeightM: d.windHeightM ?? null,
      sunshineH: d.sunshineH ?? null,
      solarMj: d.solarMj ?? null,
      rainMm: d.rainMm ?? 0,
    };
    try {
      return { ...values, ...computeEt0(site, d.date, values), date: d.date, source: 'service' as const };
    } catch (e) {
      if (e instanceof DomainInputError) {
        throw new AppError(502, 'weather_service_bad_response', `The weather service sent impossible data for ${d.date}: ${e.message}`);
      }
      throw e;
    }
  });

  const written = await inTx(ctx.db, async (tx) => {
    const rows = await upsertDays(tx, siteId, toStore, input.replaceLocal ? undefined : 'service');
    await recordAudit(tx, ctx.actor, {
      action: 'weather.fetch', entityType: 'weather_day', entityId: `${siteId}:${input.from}..${input.to}`, siteId,
      after: { from: input.from, to: input.to, received: toStore.length, saved: rows.length, replaceLocal: input.replaceLocal },
    });
    return rows;
  });
  const savedDates = new Set(written.map((w) => w.date));
  const received = new Set(toStore.map((d) => d.date));
  return {
    from: input.from,
    to: input.to,
    received: toStore.length,
    saved: written.length,
    /** Days kept as typed in or imported, because replaceLocal was false. */
    keptLocal: toStore.filter((d) => !savedDates.has(d.date)).map((d) => d.date),
    /** Days the service had no data for. */
    missing: datesBetween(input.from, input.to).filter((d) => !received.has(d)),
    items: written.map(weatherDayView).sort((a, b) => a.date.localeCompare(b.date)),
  };
}
