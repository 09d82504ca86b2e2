import { inArray } from 'drizzle-orm';
import type { Db } from './client';
import { sites } from './schema/index';
import { generateDays, type Regime } from '../weather/generator';
import { addDays, computeEt0, siteToday, upsertDays, type DayToStore } from '../services/weather';

/** Days of demo weather per site, ending yesterday at the site. */
export const DEMO_WEATHER_DAYS = 90;
/** The demo's dry spell: the last 14 days up to yesterday, after a three-day rain event. */
export const DEMO_DRY_SPELL_DAYS = 14;

/**
 * Invented weather for the demo sites, from the same generator as the fake weather
 * service, with ET₀ computed as for any stored day. The scenario forces a rain event
 * (days −20 … −18 before today) and then a dry, warm spell over the last 14 days, so the
 * watering-need screen has something to show; the rest is the generator's own weather.
 */
export async function seedDemoWeather(db: Db, siteIds: number[], today: Date): Promise<number> {
  if (siteIds.length === 0) return 0;
  const rows = await db.select().from(sites).where(inArray(sites.id, siteIds));
  let count = 0;
  for (const site of rows) {
    const yesterday = addDays(siteToday(site, today.getTime()), -1);
    const dryFrom = addDays(yesterday, -(DEMO_DRY_SPELL_DAYS - 1));
    const wetFrom = addDays(dryFrom, -6);
    const wetTo = addDays(dryFrom, -4);
    const regime = (date: string): Regime | undefined =>
      date >= dryFrom ? 'dry' : date >= wetFrom && date <= wetTo ? 'wet' : undefined;
    const days = generateDays(site.latitude, site.longitude, addDays(yesterday, -(DEMO_WEATHER_DAYS - 1)), yesterday, { regime });
    const toStore: DayToStore[] = days.map((d) => {
      const values = { ...d, solarMj: null };
      return { ...values, ...computeEt0(site, d.date, values), source: 'service' };
    });
    count += (await upsertDays(db, site.id, toStore)).length;
  }
  return count;
}
