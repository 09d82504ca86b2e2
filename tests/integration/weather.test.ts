import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Express } from 'express';
import { and, eq, sql } from 'drizzle-orm';
import { auditLog, weatherDays } from '../../server/db/schema/index';
import { dayOfYear, referenceEt0 } from '../../server/domain/agronomy';
import { startFakeWeatherService, type FakeWeatherService } from '../../server/weather/fake-service';
import { generateDay } from '../../server/weather/generator';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

type Agent = Awaited<ReturnType<typeof signedIn>>;

let tdb: TestDb;
let app: Express;
let f: Fixture;
let fake: FakeWeatherService;
const as: Record<'admin' | 'manager' | 'technician' | 'owner', Agent> = {} as never;

// Fixture sites: latitude 40°, longitude −105°, elevation 1600 m.
const SITE = { latitudeDeg: 40, elevationM: 1600 };

async function storedDays(siteId: number) {
  return tdb.db.select().from(weatherDays).where(eq(weatherDays.siteId, siteId)).orderBy(weatherDays.date);
}
async function counts() {
  const r = await tdb.db.execute(sql`select (select count(*) from weather_days)::int as days, (select count(*) from audit_log)::int as audit`);
  return r.rows[0];
}
const csv = (...lines: string[]) => Buffer.from(lines.join('\n') + '\n');
const HEADER = 'date,tmax_c,tmin_c,rh_max_pct,rh_min_pct,wind_ms,sunshine_h,solar_mj,rain_mm';

beforeAll(async () => {
  fake = await startFakeWeatherService({ port: 0 });
  process.env.WEATHER_URL = fake.url;
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
  for (const who of ['admin', 'manager', 'technician', 'owner'] as const) as[who] = await signedIn(app, f.users[who].email);
});
afterAll(async () => {
  delete process.env.WEATHER_URL;
  await fake.close();
  await tdb.drop();
});

describe('a day of weather typed into the form', () => {
  it('stores ET₀ equal to referenceEt0 of the same inputs', async () => {
    const day = { tmaxC: 31.5, tminC: 14.2, rhMaxPct: 78, rhMinPct: 27, windMs: 3.4, windHeightM: 10, sunshineH: 11.2, rainMm: 0 };
    const res = await as.technician.put(`/api/sites/${f.siteA}/weather/2025-07-06`).send(day);
    expect(res.status).toBe(200);
    const expected = referenceEt0({
      tmaxC: 31.5, tminC: 14.2, rhMaxPct: 78, rhMinPct: 27, windSpeedMs: 3.4, windHeightM: 10, sunshineHours: 11.2,
      ...SITE, dayOfYear: dayOfYear('2025-07-06'),
    });
    const [row] = (await storedDays(f.siteA)).filter((d) => d.date === '2025-07-06');
    expect(row.et0Mm).toBeCloseTo(expected, 10);
    expect(row.source).toBe('manual');
    expect(row.et0Method).toBe('rh_max_min/sunshine/wind_measured');
    expect(res.body).toMatchObject({ date: '2025-07-06', et0Mm: Math.round(expected * 100) / 100, created: true, et0Fallbacks: [] });
    const audit = await tdb.db.select().from(auditLog).where(eq(auditLog.action, 'weather.save'));
    expect(audit.map((a) => a.entityId)).toContain(`${f.siteA}:2025-07-06`);
  });

  it('falls back to FAO-56 procedures when only temperatures are known, and says so', async () => {
    const res = await as.manager.put(`/api/sites/${f.siteA}/weather/2025-07-07`).send({ tmaxC: 29, tminC: 13 });
    expect(res.status).toBe(200);
    const expected = referenceEt0({ tmaxC: 29, tminC: 13, ...SITE, dayOfYear: dayOfYear('2025-07-07') });
    expect(res.body.et0Mm).toBeCloseTo(expected, 2);
    expect(res.body.et0Method).toBe('tmin/temperature_range/wind_assumed');
    expect(res.body.et0Fallbacks).toEqual(['humidity_from_tmin', 'radiation_from_temperature_range', 'wind_assumed_2ms']);
    expect(res.body.rainMm).toBe(0);
  });

  it('replaces a stored day of the same date instead of adding a second one', async () => {
    const res = await as.admin.put(`/api/sites/${f.siteA}/weather/2025-07-07`).send({ tmaxC: 30, tminC: 12, rainMm: 4 });
    expect(res.status).toBe(200);
    expect(res.body.created).toBe(false);
    const days = (await storedDays(f.siteA)).filter((d) => d.date === '2025-07-07');
    expect(days).toHaveLength(1);
    expect(days[0].rainMm).toBe(4);
  });

  it('refuses Tmin above Tmax with a 400 naming tminC, and stores nothing', async () => {
    const before = await counts();
    const res = await as.admin.put(`/api/sites/${f.siteA}/weather/2025-07-08`).send({ tmaxC: 12, tminC: 18 });
    expect(res.status).toBe(400);
    expect(res.body.error.code).toBe('validation_failed');
    expect(res.body.error.details.map((d: { path: string }) => d.path)).toEqual(['tminC']);
    expect(await counts()).toEqual(before);
  });

  it.each([
    ['humidity above 100 %', { tmaxC: 20, tminC: 10, rhMaxPct: 104 }, 'rhMaxPct'],
    ['negative wind', { tmaxC: 20, tminC: 10, windMs: -1 }, 'windMs'],
    ['RHmin above RHmax', { tmaxC: 20, tminC: 10, rhMaxPct: 60, rhMinPct: 70 }, 'rhMinPct'],
    ['an unknown field', { tmaxC: 20, tminC: 10, dewPointC: 5 }, 'dewPointC'],
    ['no Tmax', { tminC: 10 }, 'tmaxC'],
  ])('refuses %s with a 400 naming the field', async (_what, body, field) => {
    const before = await counts();
    const res = await as.admin.put(`/api/sites/${f.siteA}/weather/2025-07-08`).send(body);
    expect(res.status).toBe(400);
    expect(res.body.error.details.map((d: { path: string }) => d.path)).toContain(field);
    expect(await counts()).toEqual(before);
  });

  it('turns a domain error (more sunshine than daylight) into a 400 naming sunshineH', async () => {
    // 21 December at 40° N has about 9.3 h of daylight (F56 Eq. 34).
    const res = await as.admin.put(`/api/sites/${f.siteA}/weather/2025-12-21`).send({ tmaxC: 5, tminC: -4, sunshineH: 12 });
    expect(res.status).toBe(400);
    expect(res.body.error.details).toEqual([{ path: 'sunshineH', message: expect.stringMatching(/sunshineHours .* exceeds the day length/) }]);
  });

  it('refuses a date after today at the site and a date that does not exist', async () => {
    const future = await as.admin.put(`/api/sites/${f.siteA}/weather/2099-01-01`).send({ tmaxC: 5, tminC: 1 });
    expect(future.status).toBe(400);
    expect(future.body.error.details[0].path).toBe('date');
    const bogus = await as.admin.put(`/api/sites/${f.siteA}/weather/2025-02-30`).send({ tmaxC: 5, tminC: 1 });
    expect(bogus.status).toBe(400);
    expect(bogus.body.error.details[0].path).toBe('date');
  });

  it('lists stored days of a date range in date order', async () => {
    const res = await as.owner.get(`/api/sites/${f.siteA}/weather?from=2025-07-01&to=2025-07-31`);
    expect(res.status).toBe(200);
    expect(res.body.items.map((d: { date: string }) => d.date)).toEqual(['2025-07-06', '2025-07-07']);
    const bad = await as.owner.get(`/api/sites/${f.siteA}/weather?from=2025-08-01&to=2025-07-01`);
    expect(bad.status).toBe(400);
  });
});

describe('weather from a CSV file', () => {
  it('serves a template whose header row lists the columns', async () => {
    const res = await as.owner.get('/api/weather/template.csv');
    expect(res.status).toBe(200);
    expect(res.headers['content-type']).toMatch(/^text\/csv/);
    const header = res.text.split('\n').find((l) => !l.startsWith('#'));
    expect(header).toBe('date,tmax_c,tmin_c,rh_max_pct,rh_min_pct,wind_ms,wind_height_m,sunshine_h,solar_mj,rain_mm');
  });

  it('previews every row with its ET₀ and lists per-row errors, saving nothing', async () => {
    const before = await counts();
    const file = csv(
      HEADER,
      '2025-06-01,28.1,12.4,80,30,2.5,11.0,,0',
      '2025-06-02,12.0,18.0,80,30,2.5,11.0,,0',
      '2025-06-03,27.0,13.0,,,,,,1.5',
      '2025-06-04,26.0,12.0,80,30,2.5,11.0,,lots',
    );
    const res = await as.technician.post(`/api/sites/${f.siteA}/weather/import?dryRun=1`).attach('file', file, 'june.csv');
    expect(res.status).toBe(200);
    expect(res.body.dryRun).toBe(true);
    expect(res.body.rows.map((r: { line: number; date: string }) => [r.line, r.date])).toEqual([[2, '2025-06-01'], [4, '2025-06-03']]);
    expect(res.body.rows[1].et0Mm).toBeCloseTo(referenceEt0({ tmaxC: 27, tminC: 13, ...SITE, dayOfYear: dayOfYear('2025-06-03') }), 2);
    expect(res.body.errors).toEqual([
      { line: 3, field: 'tmin_c', message: 'Tmin must not be above Tmax' },
      { line: 5, field: 'rain_mm', message: expect.stringContaining('not a number') },
    ]);
    expect(await counts()).toEqual(before);
  });

  it('saves nothing from a file with one bad row and reports that row by line number', async () => {
    const before = await counts();
    const file = csv(
      HEADER,
      '2025-05-01,22,9,85,35,2,10,,0',
      '2025-05-02,23,10,85,35,2,10,,0',
      '2025-05-03,24,11,105,35,2,10,,0',
      '2025-05-04,25,12,85,35,2,10,,0',
    );
    const res = await as.admin.post(`/api/sites/${f.siteA}/weather/import`).attach('file', file, 'may.csv');
    expect(res.status).toBe(400);
    expect(res.body.error.code).toBe('csv_rows_invalid');
    expect(res.body.error.message).toMatch(/nothing was saved/);
    expect(res.body.error.details).toEqual([{ line: 4, field: 'rh_max_pct', message: expect.any(String) }]);
    expect(await counts()).toEqual(before);
  });

  it('saves every row of a valid file in one go, with ET₀ and source csv', async () => {
    const file = csv(
      '# exported from the site station',
      'date,tmax_c,tmin_c,rh_max_pct,rh_min_pct,wind_ms,wind_height_m,sunshine_h,solar_mj,rain_mm',
      '2025-04-01,18.5,4.0,90,40,3.0,10,,17.2,0',
      '2025-04-02,16.0,5.5,95,55,4.1,10,,9.8,6.4',
      '2025-04-03,19.0,3.5,,,,,,,',
      '2025-04-04,21.0,6.0,80,30,2.2,2,9.5,,0',
    );
    const res = await as.manager.post(`/api/sites/${f.siteA}/weather/import?dryRun=0`).attach('file', file, 'april.csv');
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ dryRun: false, saved: 4, errorCount: 0, errors: [] });
    const april = (await storedDays(f.siteA)).filter((d) => d.date.startsWith('2025-04'));
    expect(april.map((d) => [d.date, d.source, d.rainMm])).toEqual([
      ['2025-04-01', 'csv', 0], ['2025-04-02', 'csv', 6.4], ['2025-04-03', 'csv', 0], ['2025-04-04', 'csv', 0],
    ]);
    expect(april[0].et0Mm).toBeCloseTo(
      referenceEt0({
        tmaxC: 18.5, tminC: 4, rhMaxPct: 90, rhMinPct: 40, windSpeedMs: 3, windHeightM: 10, solarRadiationMJ: 17.2,
        ...SITE, dayOfYear: dayOfYear('2025-04-01'),
      }),
      10,
    );
    expect(april[2].et0Method).toBe('tmin/temperature_range/wind_assumed');
    const audit = await tdb.db.select().from(auditLog).where(eq(auditLog.action, 'weather.import'));
    expect(audit).toHaveLength(1);
    expect(audit[0].after).toMatchObject({ rows: 4, from: '2025-04-01', to: '2025-04-04', file: 'april.csv' });
  });

  it('marks rows that would replace a stored day in the preview', async () => {
    const file = csv('date,tmax_c,tmin_c', '2025-04-02,17,6', '2025-04-10,17,6');
    const res = await as.admin.post(`/api/sites/${f.siteA}/weather/import?dryRun=1`).attach('file', file, 'again.csv');
    expect(res.body.rows.map((r: { date: string; replaces: boolean }) => [r.date, r.replaces])).toEqual([
      ['2025-04-02', true], ['2025-04-10', false],
    ]);
  });

  it.each([
    ['a PNG image', Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 0x0d, 0x49, 0x48, 0x44, 0x52]), 'not_csv'],
    ['a file over 5 MB', Buffer.alloc(5 * 1024 * 1024 + 10, 'a'), 'file_too_large'],
    ['an empty file', Buffer.alloc(0), 'csv_empty'],
    ['a header without rows', csv(HEADER), 'csv_empty'],
    ['a file without the tmin_c column', csv('date,tmax_c', '2025-03-01,12'), 'csv_missing_columns'],
    ['a file with a misspelt column', csv('date,tmax_c,tmin_c,rain', '2025-03-01,12,3,0'), 'csv_unknown_columns'],
    ['a file with an unclosed quote', csv(HEADER, '"2025-03-01,12,3,,,,,,0'), 'csv_unreadable'],
  ])('refuses %s with a clear 400 and saves nothing', async (_what, buffer, code) => {
    const before = await counts();
    const res = await as.admin.post(`/api/sites/${f.siteA}/weather/import`).attach('file', buffer, 'upload.csv');
    expect(res.status).toBe(400);
    expect(res.body.error.code).toBe(code);
    expect(res.body.error.message).toEqual(expect.any(String));
    expect(await counts()).toEqual(before);
  });

  it('refuses an import without a file', async () => {
    const res = await as.admin.post(`/api/sites/${f.siteA}/weather/import`).send({});
    expect(res.status).toBe(400);
    expect(res.body.error.code).toBe('file_missing');
  });
});

describe('weather fetched from the weather service', () => {
  it('stores every requested day as the fake service invents it, deterministically', async () => {
    const res = await as.manager.post(`/api/sites/${f.siteB}/weather/fetch`).send({ from: '2025-03-01', to: '2025-03-10' });
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ from: '2025-03-01', to: '2025-03-10', received: 10, saved: 10, keptLocal: [], missing: [] });
    const first = await storedDays(f.siteB);
    expect(first.map((d) => d.date)).toEqual(Array.from({ length: 10 }, (_, i) => `2025-03-${String(i + 1).padStart(2, '0')}`));
    expect(first.every((d) => d.source === 'service')).toBe(true);
    const g = generateDay(40, -105, '2025-03-04');
    expect(first[3]).toMatchObject({ tmaxC: g.tmaxC, tminC: g.tminC, rhMaxPct: g.rhMaxPct, windMs: g.windMs, windHeightM: 10, rainMm: g.rainMm });
    expect(first[3].et0Mm).toBeCloseTo(
      referenceEt0({
        tmaxC: g.tmaxC, tminC: g.tminC, rhMaxPct: g.rhMaxPct, rhMinPct: g.rhMinPct, windSpeedMs: g.windMs, windHeightM: 10,
        sunshineHours: g.sunshineH, ...SITE, dayOfYear: dayOfYear('2025-03-04'),
      }),
      10,
    );

    const again = await as.admin.post(`/api/sites/${f.siteB}/weather/fetch`).send({ from: '2025-03-05', to: '2025-03-12' });
    expect(again.status).toBe(200);
    const second = await storedDays(f.siteB);
    const strip = (d: (typeof first)[number]) => ({ ...d, updatedAt: null });
    expect(second.slice(0, 10).map(strip)).toEqual(first.map(strip));
    expect(second).toHaveLength(12);
  });

  it('keeps days typed in by hand unless asked to replace them', async () => {
    await as.admin.put(`/api/sites/${f.siteB}/weather/2025-03-20`).send({ tmaxC: 15, tminC: 2, rainMm: 12 });
    const keep = await as.admin.post(`/api/sites/${f.siteB}/weather/fetch`).send({ from: '2025-03-19', to: '2025-03-21' });
    expect(keep.body).toMatchObject({ received: 3, saved: 2, keptLocal: ['2025-03-20'] });
    const [kept] = await tdb.db.select().from(weatherDays).where(and(eq(weatherDays.siteId, f.siteB), eq(weatherDays.date, '2025-03-20')));
    expect(kept).toMatchObject({ source: 'manual', rainMm: 12 });
    const replace = await as.admin
      .post(`/api/sites/${f.siteB}/weather/fetch`)
      .send({ from: '2025-03-19', to: '2025-03-21', replaceLocal: true });
    expect(replace.body).toMatchObject({ saved: 3, keptLocal: [] });
  });

  it('refuses a range that ends in the future or runs backwards', async () => {
    expect((await as.admin.post(`/api/sites/${f.siteB}/weather/fetch`).send({ from: '2025-03-10', to: '2025-03-01' })).status).toBe(400);
    const future = await as.admin.post(`/api/sites/${f.siteB}/weather/fetch`).send({ from: '2025-03-10', to: '2099-03-01' });
    expect(future.status).toBe(400);
    expect(future.body.error.details[0].path).toBe('to');
  });

  it('answers 502 and stores nothing when the weather service cannot be reached', async () => {
    const down = await startFakeWeatherService({ port: 0 });
    await down.close();
    process.env.WEATHER_URL = down.url;
    const offline = buildTestApp(tdb).app;
    process.env.WEATHER_URL = fake.url;
    const agent = await signedIn(offline, f.users.admin.email);
    const before = await counts();
    const res = await agent.post(`/api/sites/${f.siteA}/weather/fetch`).send({ from: '2025-01-01', to: '2025-01-03' });
    expect(res.status).toBe(502);
    expect(res.body.error.code).toBe('weather_service_unavailable');
    expect(await counts()).toEqual(before);
  });
});

describe('who may read and write weather', () => {
  it('refuses writes by an owner with 403 on their own site', async () => {
    expect((await as.owner.put(`/api/sites/${f.siteA}/weather/2025-07-09`).send({ tmaxC: 20, tminC: 10 })).status).toBe(403);
    expect((await as.owner.post(`/api/sites/${f.siteA}/weather/import?dryRun=1`).attach('file', csv('date,tmax_c,tmin_c', '2025-01-01,5,1'), 'a.csv')).status).toBe(403);
    expect((await as.owner.post(`/api/sites/${f.siteA}/weather/fetch`).send({ from: '2025-01-01', to: '2025-01-02' })).status).toBe(403);
  });

  it('lets only admins and managers fetch from the weather service', async () => {
    expect((await as.technician.post(`/api/sites/${f.siteA}/weather/fetch`).send({ from: '2025-01-01', to: '2025-01-02' })).status).toBe(403);
  });

  it('answers 404 to a technician or owner on a site they are not a member of', async () => {
    expect((await as.technician.put(`/api/sites/${f.siteB}/weather/2025-07-09`).send({ tmaxC: 20, tminC: 10 })).status).toBe(404);
    expect((await as.technician.get(`/api/sites/${f.siteB}/weather`)).status).toBe(404);
    expect((await as.owner.get(`/api/sites/${f.siteB}/weather`)).status).toBe(404);
    expect((await as.technician.post(`/api/sites/${f.siteB}/weather/import`).attach('file', csv('date,tmax_c,tmin_c', '2025-01-01,5,1'), 'a.csv')).status).toBe(404);
  });
});

describe('a coastal site', () => {
  // An invented harbour site, a few hundred metres from the sea.
  const HARBOUR = { latitude: 43.3, longitude: -8.4, elevationM: 25 };
  const place = { latitudeDeg: HARBOUR.latitude, elevationM: HARBOUR.elevationM };
  let harbourId: number;

  beforeAll(async () => {
    const res = await as.admin.post('/api/sites').send({
      name: 'Harbour walk gardens', timezone: 'Europe/Madrid', ...HARBOUR, supplyFlowLpm: 80, staticPressureKPa: 400, coastal: true,
    });
    expect(res.status).toBe(201);
    expect(res.body.coastal).toBe(true);
    harbourId = res.body.id;
  });

  it('is inland unless said otherwise, and the flag can be changed and read back', async () => {
    expect((await as.admin.get(`/api/sites/${f.siteA}`)).body.coastal).toBe(false);
    const bad = await as.admin.patch(`/api/sites/${harbourId}`).send({ coastal: 'yes' });
    expect(bad.status).toBe(400);
    expect(bad.body.error.details.map((d: { path: string }) => d.path)).toEqual(['coastal']);
    expect((await as.admin.get(`/api/sites/${harbourId}`)).body.coastal).toBe(true);
  });

  it('estimates radiation from the temperature range with kRs 0.19 (FAO-56 Eq. 50), so ET₀ differs from inland', async () => {
    const day = { tmaxC: 27, tminC: 15 };
    const res = await as.manager.put(`/api/sites/${harbourId}/weather/2025-07-15`).send(day);
    expect(res.status).toBe(200);
    expect(res.body.et0Fallbacks).toContain('radiation_from_temperature_range');
    const doy = dayOfYear('2025-07-15');
    const coastal = referenceEt0({ ...day, ...place, dayOfYear: doy, coastal: true });
    const inland = referenceEt0({ ...day, ...place, dayOfYear: doy, coastal: false });
    const [row] = (await storedDays(harbourId)).filter((d) => d.date === '2025-07-15');
    expect(row.et0Mm).toBeCloseTo(coastal, 10);
    // More radiation estimated near the sea (0.19 against 0.16 × √ΔT × Ra): a higher ET₀.
    expect(coastal - inland).toBeGreaterThan(0.1);
    expect(Math.abs(row.et0Mm - inland)).toBeGreaterThan(0.1);
  });

  it('uses the coastal coefficient for imported days too, and none where radiation is measured', async () => {
    const file = csv('date,tmax_c,tmin_c,solar_mj', '2025-07-16,26,14,', '2025-07-17,26,14,24');
    const res = await as.admin.post(`/api/sites/${harbourId}/weather/import`).attach('file', file, 'harbour.csv');
    expect(res.status).toBe(200);
    const days = (await storedDays(harbourId)).filter((d) => d.date >= '2025-07-16');
    const base = { tmaxC: 26, tminC: 14, ...place };
    expect(days[0].et0Mm).toBeCloseTo(referenceEt0({ ...base, dayOfYear: dayOfYear('2025-07-16'), coastal: true }), 10);
    // Measured radiation: the coastal flag changes nothing.
    const measured = { ...base, solarRadiationMJ: 24, dayOfYear: dayOfYear('2025-07-17') };
    expect(days[1].et0Mm).toBeCloseTo(referenceEt0({ ...measured, coastal: false }), 10);
    expect(referenceEt0({ ...measured, coastal: true })).toBe(referenceEt0({ ...measured, coastal: false }));
  });

  it('goes back to kRs 0.16 for days saved after the site is marked inland', async () => {
    expect((await as.manager.patch(`/api/sites/${harbourId}`).send({ coastal: false })).status).toBe(200);
    const res = await as.manager.put(`/api/sites/${harbourId}/weather/2025-07-18`).send({ tmaxC: 27, tminC: 15 });
    expect(res.status).toBe(200);
    const [row] = (await storedDays(harbourId)).filter((d) => d.date === '2025-07-18');
    expect(row.et0Mm).toBeCloseTo(referenceEt0({ tmaxC: 27, tminC: 15, ...place, dayOfYear: dayOfYear('2025-07-18') }), 10);
  });
});
