import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { asc, eq } from 'drizzle-orm';
import { sites, weatherDays } from '../../server/db/schema/index';
import { seedDemo } from '../../server/db/seed-demo';
import { DEMO_WEATHER_DAYS, seedDemoWeather } from '../../server/db/seed-weather';
import { computeEt0, siteToday, addDays } from '../../server/services/weather';
import { createTestDb, type TestDb } from '../helpers/db';
import { seedFixture } from '../helpers/fixtures';

let demo: TestDb;
let fixed: TestDb;
beforeAll(async () => {
  [demo, fixed] = await Promise.all([createTestDb(), createTestDb()]);
});
afterAll(async () => {
  await Promise.all([demo.drop(), fixed.drop()]);
});

function longestDryRun(days: { rainMm: number }[]) {
  let best = 0;
  let cur = 0;
  for (const d of days) {
    cur = d.rainMm > 0 ? 0 : cur + 1;
    best = Math.max(best, cur);
  }
  return best;
}

describe('demo weather', () => {
  it('gives every demo site at least 60 days up to yesterday, with a dry spell and rainy days, ET₀ computed', async () => {
    const seeded = (await seedDemo(demo.db))!;
    const now = Date.now();
    for (const id of Object.values(seeded.siteIds)) {
      const [site] = await demo.db.select().from(sites).where(eq(sites.id, id));
      const days = await demo.db.select().from(weatherDays).where(eq(weatherDays.siteId, id)).orderBy(asc(weatherDays.date));
      const yesterday = addDays(siteToday(site, now), -1);
      expect(days.length).toBeGreaterThanOrEqual(60);
      expect(days.at(-1)!.date).toBe(yesterday);
      expect(days.filter((d) => d.rainMm > 0).length).toBeGreaterThanOrEqual(3);
      expect(longestDryRun(days.slice(-30))).toBeGreaterThanOrEqual(10);
      for (const d of days.slice(-5)) expect(d.et0Mm).toBeCloseTo(computeEt0(site, d.date, d).et0Mm, 10);
    }
  });

  it('is the same for the same sites and day, and replaces rather than duplicates when run again', async () => {
    await seedFixture(fixed.db);
    const ids = (await fixed.db.select({ id: sites.id }).from(sites)).map((s) => s.id);
    const today = new Date('2025-08-15T18:00:00Z');
    expect(await seedDemoWeather(fixed.db, ids, today)).toBe(DEMO_WEATHER_DAYS * ids.length);
    const first = await fixed.db.select().from(weatherDays).orderBy(asc(weatherDays.siteId), asc(weatherDays.date));
    await seedDemoWeather(fixed.db, ids, today);
    const second = await fixed.db.select().from(weatherDays).orderBy(asc(weatherDays.siteId), asc(weatherDays.date));
    const strip = (rows: typeof first) => rows.map((r) => ({ ...r, updatedAt: null }));
    expect(strip(second)).toEqual(strip(first));
    expect(first.filter((d) => d.siteId === ids[0]).at(-1)!.date).toBe('2025-08-14');
  });
});
