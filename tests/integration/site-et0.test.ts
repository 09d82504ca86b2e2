import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Express } from 'express';
import { eq } from 'drizzle-orm';
import { sites, weatherDays } from '../../server/db/schema/index';
import { dayOfYear, referenceEt0 } from '../../server/domain/agronomy';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

let tdb: TestDb;
let app: Express;
let f: Fixture;
let manager: Awaited<ReturnType<typeof signedIn>>;

// Fixture sites: latitude 40°, longitude −105°, elevation 1600 m, not coastal.
const FULL = { tmaxC: 31.5, tminC: 14.2, rhMaxPct: 78, rhMinPct: 27, windMs: 3.4, windHeightM: 10, sunshineH: 11.2, rainMm: 0 };
const TEMPS = { tmaxC: 29, tminC: 13 };

/** The domain inputs of FULL and TEMPS (API names → referenceEt0's names). */
const fullInputs = { tmaxC: 31.5, tminC: 14.2, rhMaxPct: 78, rhMinPct: 27, windSpeedMs: 3.4, windHeightM: 10, sunshineHours: 11.2 };
const tempInputs = { tmaxC: 29, tminC: 13 };

const stored = async (siteId: number) => tdb.db.select().from(weatherDays).where(eq(weatherDays.siteId, siteId)).orderBy(weatherDays.date);
const byDate = async (siteId: number) => new Map((await stored(siteId)).map((d) => [d.date, d]));

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
  manager = await signedIn(app, f.users.manager.email);
  for (const siteId of [f.siteA, f.siteB]) {
    expect((await manager.put(`/api/sites/${siteId}/weather/2025-07-06`).send(FULL)).status).toBe(200);
    expect((await manager.put(`/api/sites/${siteId}/weather/2025-07-07`).send(TEMPS)).status).toBe(200);
  }
  // A day whose ET₀ came from outside Runnel as a given value (no path of computeEt0 in et0Method).
  await tdb.db.insert(weatherDays).values({ siteId: f.siteA, date: '2025-07-08', tmaxC: 30, tminC: 15, rainMm: 0, et0Mm: 6.25, et0Method: 'provider', source: 'service' });
});
afterAll(async () => {
  await tdb.drop();
});

describe('stored ET₀ after a change of the site', () => {
  it('is left as it was when only the name or the longitude changes', async () => {
    const before = await stored(f.siteA);
    expect((await manager.patch(`/api/sites/${f.siteA}`).send({ name: 'Test Site A renamed' })).status).toBe(200);
    expect((await manager.patch(`/api/sites/${f.siteA}`).send({ longitude: -104 })).status).toBe(200);
    // Longitude is not an input of the daily FAO-56 equations (Allen et al. 1998, FAO-56 Eq. 6, 21, 34): rows untouched, updatedAt too.
    expect(await stored(f.siteA)).toEqual(before);
  });

  it('is computed again for the new latitude and elevation, in Runnel-computed days only and at that site only', async () => {
    const siteB = await stored(f.siteB);
    const res = await manager.patch(`/api/sites/${f.siteA}`).send({ latitude: 52.5, elevationM: 30 });
    expect(res.status, JSON.stringify(res.body)).toBe(200);
    const days = await byDate(f.siteA);
    // Expected values from the domain's FAO-56 Penman–Monteith (Allen et al. 1998, FAO-56 Eq. 6) at the new location.
    const at = { latitudeDeg: 52.5, elevationM: 30 };
    const full = referenceEt0({ ...fullInputs, ...at, dayOfYear: dayOfYear('2025-07-06') });
    const temps = referenceEt0({ ...tempInputs, ...at, dayOfYear: dayOfYear('2025-07-07') });
    const old = referenceEt0({ ...fullInputs, latitudeDeg: 40, elevationM: 1600, dayOfYear: dayOfYear('2025-07-06') });
    expect(full).not.toBe(old);
    expect(days.get('2025-07-06')).toMatchObject({ et0Mm: full, et0Method: 'rh_max_min/sunshine/wind_measured', tmaxC: 31.5, source: 'manual' });
    expect(days.get('2025-07-07')).toMatchObject({ et0Mm: temps, et0Method: 'tmin/temperature_range/wind_assumed' });
    expect(days.get('2025-07-08')).toMatchObject({ et0Mm: 6.25, et0Method: 'provider' });
    expect(await stored(f.siteB)).toEqual(siteB);
    const listed = await manager.get(`/api/sites/${f.siteA}/weather?from=2025-07-06&to=2025-07-08`);
    expect(listed.body.items.map((d: { et0Mm: number }) => d.et0Mm)).toEqual([Math.round(full * 100) / 100, Math.round(temps * 100) / 100, 6.25]);
  });

  it('follows the coastal flag where radiation comes from the temperature range', async () => {
    const before = await byDate(f.siteA);
    expect((await manager.patch(`/api/sites/${f.siteA}`).send({ coastal: true })).status).toBe(200);
    const days = await byDate(f.siteA);
    // kRs 0.19 for coastal sites in FAO-56 Eq. 50 (Allen et al. 1998); radiation from sunshine (Eq. 35) does not use it.
    const temps = referenceEt0({ ...tempInputs, latitudeDeg: 52.5, elevationM: 30, coastal: true, dayOfYear: dayOfYear('2025-07-07') });
    expect(temps).not.toBe(before.get('2025-07-07')!.et0Mm);
    expect(days.get('2025-07-07')!.et0Mm).toBe(temps);
    expect(days.get('2025-07-06')).toEqual(before.get('2025-07-06'));
    expect(days.get('2025-07-08')).toEqual(before.get('2025-07-08'));
  });

  it('refuses a location where a stored day is impossible, changing neither the site nor its weather', async () => {
    // 10 MJ/m² on 21 December is below Ra at 40° N but above Ra at 60° N (FAO-56 Eq. 21; Ra must bound Rs).
    expect((await manager.put(`/api/sites/${f.siteB}/weather/2025-12-21`).send({ ...TEMPS, tmaxC: 8, tminC: 1, solarMj: 10 })).status).toBe(200);
    const [siteBefore] = await tdb.db.select().from(sites).where(eq(sites.id, f.siteB));
    const weatherBefore = await stored(f.siteB);
    const res = await manager.patch(`/api/sites/${f.siteB}`).send({ latitude: 60, name: 'Moved north' });
    expect(res.status).toBe(400);
    expect(res.body.error.details).toEqual([{ path: 'latitude', message: expect.stringContaining('2025-12-21') }]);
    expect((await tdb.db.select().from(sites).where(eq(sites.id, f.siteB)))[0]).toEqual(siteBefore);
    expect(await stored(f.siteB)).toEqual(weatherBefore);
  });
});
