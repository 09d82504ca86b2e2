import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import { controllers, sites, weatherDays, zones } from '../../server/db/schema/index';
import { startFakeWeatherService, type FakeWeatherService } from '../../server/weather/fake-service';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

type Who = 'admin' | 'manager' | 'technician' | 'owner' | 'stranger';
type Case = {
  route: string;
  method: 'get' | 'post' | 'put' | 'patch' | 'delete';
  /** Builds the path (and creates what the call consumes, for deletes) before each call. */
  path: (f: Fixture, db: TestDb) => string | Promise<string>;
  body?: (f: Fixture) => object;
  /** A file sent as multipart/form-data (field, bytes, file name). */
  attach?: () => [string, Buffer, string];
  expect: Record<Who, number>;
};

let tdb: TestDb;
let app: Express;
let f: Fixture;
const agents: Partial<Record<Who, ReturnType<typeof request.agent>>> = {};
let serialNo = 0;

async function spareSite(db: TestDb) {
  const [s] = await db.db
    .insert(sites)
    .values({ name: 'Spare', timezone: 'UTC', latitude: 0, longitude: 0, supplyFlowLpm: 40, staticPressureKPa: 300 })
    .returning();
  return s.id;
}
async function spareController(db: TestDb, siteId: number) {
  const [c] = await db.db
    .insert(controllers)
    .values({ siteId, serial: `SPARE-${++serialNo}`, name: 'Spare board', relayCount: 4 })
    .returning();
  return c.id;
}
async function spareZone(db: TestDb, controllerId: number) {
  const [z] = await db.db
    .insert(zones)
    .values({
      controllerId, relay: 4, name: 'Spare zone', plantType: 'shrubs', soilTexture: 'loam', headType: 'drip',
      headCount: 10, flowPerHeadLpm: 0.1, areaM2: 10, rootDepthM: 0.4, efficiency: 0.9,
    })
    .returning();
  return z.id;
}

const newSite = () => ({
  name: 'Matrix site', timezone: 'Europe/Lisbon', latitude: 38.7, longitude: -9.1, supplyFlowLpm: 50, staticPressureKPa: 350,
});
const newController = (f: Fixture) => ({ siteId: f.siteA, serial: `MATRIX-${++serialNo}`, name: 'New board', relayCount: 4 });
const newZone = (controllerId: number, relay: number) => ({
  controllerId, relay, name: `New zone ${relay}`, plantType: 'shrubs', soilTexture: 'loam', headType: 'drip',
  headCount: 20, flowPerHeadLpm: 0.1, areaM2: 12, rootDepthM: 0.4,
});
let relayNo = 1;
let weather: FakeWeatherService;

async function spareWeatherDay(db: TestDb, siteId: number) {
  await db.db
    .insert(weatherDays)
    .values({ siteId, date: '2025-01-15', tmaxC: 8, tminC: 1, rainMm: 0, et0Mm: 0.9, et0Method: 'tmin/temperature_range/wind_assumed', source: 'manual' })
    .onConflictDoNothing();
  return `/api/sites/${siteId}/weather/2025-01-15`;
}
const weatherCsv = (): [string, Buffer, string] => ['file', Buffer.from('date,tmax_c,tmin_c,rain_mm\n2025-02-01,9,2,0\n'), 'weather.csv'];
const bucketTest = () => ({ kind: 'bucket', volumeL: 5, seconds: 10 });
const groupHeadsBody = () => ({ supplyLpm: 60, marginPct: 20, heads: [{ id: 'h1', flowLpm: 5, headType: 'spray' }] });
const writers = { admin: 200, manager: 200, technician: 200, owner: 403, stranger: 401 };
const otherSite = { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 };

const all = (n: number, stranger = 401): Record<Who, number> => ({ admin: n, manager: n, technician: n, owner: n, stranger });

export const cases: Case[] = [
  { route: 'GET /api/health', method: 'get', path: () => '/api/health', expect: all(200, 200) },
  { route: 'GET /api/auth/me', method: 'get', path: () => '/api/auth/me', expect: all(200) },
  { route: 'PATCH /api/auth/me', method: 'patch', path: () => '/api/auth/me', body: () => ({ unitSystem: 'metric' }), expect: all(200) },
  { route: 'GET /api/sites', method: 'get', path: () => '/api/sites', expect: all(200) },
  { route: 'POST /api/sites', method: 'post', path: () => '/api/sites', body: newSite, expect: { admin: 201, manager: 403, technician: 403, owner: 403, stranger: 401 } },
  { route: 'GET /api/sites/:id (member site)', method: 'get', path: (f) => `/api/sites/${f.siteA}`, expect: all(200) },
  { route: 'GET /api/sites/:id (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}`, expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'PATCH /api/sites/:id (member site)', method: 'patch', path: (f) => `/api/sites/${f.siteA}`, body: () => ({ notes: 'checked' }), expect: { admin: 200, manager: 200, technician: 403, owner: 403, stranger: 401 } },
  { route: 'PATCH /api/sites/:id (other site)', method: 'patch', path: (f) => `/api/sites/${f.siteB}`, body: () => ({ notes: 'checked' }), expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'DELETE /api/sites/:id', method: 'delete', path: (_f, db) => spareSite(db).then((id) => `/api/sites/${id}`), expect: { admin: 204, manager: 403, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/controllers', method: 'get', path: () => '/api/controllers', expect: all(200) },
  { route: 'GET /api/controllers/:id (member site)', method: 'get', path: (f) => `/api/controllers/${f.controllerA}`, expect: all(200) },
  { route: 'GET /api/controllers/:id (other site)', method: 'get', path: (f) => `/api/controllers/${f.controllerB}`, expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'POST /api/controllers', method: 'post', path: () => '/api/controllers', body: newController, expect: { admin: 201, manager: 403, technician: 403, owner: 403, stranger: 401 } },
  { route: 'PATCH /api/controllers/:id (member site)', method: 'patch', path: (f) => `/api/controllers/${f.controllerA}`, body: () => ({ staggerMs: 400 }), expect: { admin: 200, manager: 200, technician: 403, owner: 403, stranger: 401 } },
  { route: 'PATCH /api/controllers/:id (other site)', method: 'patch', path: (f) => `/api/controllers/${f.controllerB}`, body: () => ({ staggerMs: 400 }), expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'DELETE /api/controllers/:id (member site)', method: 'delete', path: (f, db) => spareController(db, f.siteA).then((id) => `/api/controllers/${id}`), expect: { admin: 204, manager: 403, technician: 403, owner: 403, stranger: 401 } },
  { route: 'DELETE /api/controllers/:id (other site)', method: 'delete', path: (f, db) => spareController(db, f.siteB).then((id) => `/api/controllers/${id}`), expect: { admin: 204, manager: 403, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/zones', method: 'get', path: () => '/api/zones', expect: all(200) },
  { route: 'GET /api/zones?siteId (other site)', method: 'get', path: (f) => `/api/zones?siteId=${f.siteB}`, expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/zones/:id (member site)', method: 'get', path: (f) => `/api/zones/${f.zoneA}`, expect: all(200) },
  { route: 'GET /api/zones/:id (other site)', method: 'get', path: (f) => `/api/zones/${f.zoneB}`, expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'POST /api/zones', method: 'post', path: () => '/api/zones', body: (f) => newZone(f.controllerA, ++relayNo), expect: { admin: 201, manager: 201, technician: 403, owner: 403, stranger: 401 } },
  { route: 'PATCH /api/zones/:id (head count)', method: 'patch', path: (f) => `/api/zones/${f.zoneA}`, body: () => ({ headCount: 7 }), expect: { admin: 200, manager: 200, technician: 200, owner: 403, stranger: 401 } },
  { route: 'PATCH /api/zones/:id (soil, not for technicians)', method: 'patch', path: (f) => `/api/zones/${f.zoneA}`, body: () => ({ soilTexture: 'clay' }), expect: { admin: 200, manager: 200, technician: 403, owner: 403, stranger: 401 } },
  { route: 'PATCH /api/zones/:id (other site)', method: 'patch', path: (f) => `/api/zones/${f.zoneB}`, body: () => ({ headCount: 7 }), expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'DELETE /api/zones/:id', method: 'delete', path: (f, db) => spareController(db, f.siteA).then((c) => spareZone(db, c)).then((id) => `/api/zones/${id}`), expect: { admin: 204, manager: 204, technician: 403, owner: 403, stranger: 401 } },
  { route: 'POST /api/auth/sign-out', method: 'post', path: () => '/api/auth/sign-out', expect: all(204, 204) },
  { route: 'GET /api/weather/template.csv', method: 'get', path: () => '/api/weather/template.csv', expect: all(200) },
  { route: 'GET /api/sites/:id/weather (member site)', method: 'get', path: (f) => `/api/sites/${f.siteA}/weather`, expect: all(200) },
  { route: 'GET /api/sites/:id/weather (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/weather`, expect: otherSite },
  { route: 'PUT /api/sites/:id/weather/:date (member site)', method: 'put', path: (f) => `/api/sites/${f.siteA}/weather/2025-01-10`, body: () => ({ tmaxC: 9, tminC: 2 }), expect: writers },
  { route: 'PUT /api/sites/:id/weather/:date (other site)', method: 'put', path: (f) => `/api/sites/${f.siteB}/weather/2025-01-10`, body: () => ({ tmaxC: 9, tminC: 2 }), expect: otherSite },
  { route: 'DELETE /api/sites/:id/weather/:date (member site)', method: 'delete', path: (f, db) => spareWeatherDay(db, f.siteA), expect: { admin: 204, manager: 204, technician: 204, owner: 403, stranger: 401 } },
  { route: 'DELETE /api/sites/:id/weather/:date (other site)', method: 'delete', path: (f, db) => spareWeatherDay(db, f.siteB), expect: { admin: 204, manager: 204, technician: 404, owner: 404, stranger: 401 } },
  { route: 'POST /api/sites/:id/weather/import (member site)', method: 'post', path: (f) => `/api/sites/${f.siteA}/weather/import?dryRun=1`, attach: weatherCsv, expect: writers },
  { route: 'POST /api/sites/:id/weather/import (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/weather/import?dryRun=1`, attach: weatherCsv, expect: otherSite },
  { route: 'POST /api/sites/:id/weather/fetch (member site)', method: 'post', path: (f) => `/api/sites/${f.siteA}/weather/fetch`, body: () => ({ from: '2025-02-01', to: '2025-02-03' }), expect: { admin: 200, manager: 200, technician: 403, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/weather/fetch (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/weather/fetch`, body: () => ({ from: '2025-02-01', to: '2025-02-03' }), expect: otherSite },
  { route: 'GET /api/sites/:id/supply-tests (member site)', method: 'get', path: (f) => `/api/sites/${f.siteA}/supply-tests`, expect: all(200) },
  { route: 'GET /api/sites/:id/supply-tests (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/supply-tests`, expect: otherSite },
  { route: 'POST /api/sites/:id/supply-tests (member site)', method: 'post', path: (f) => `/api/sites/${f.siteA}/supply-tests`, body: bucketTest, expect: { admin: 201, manager: 201, technician: 201, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/supply-tests (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/supply-tests`, body: bucketTest, expect: { admin: 201, manager: 201, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/sites/:id/planning (member site)', method: 'get', path: (f) => `/api/sites/${f.siteA}/planning?pipeMm=25&pipeLengthM=30`, expect: all(200) },
  { route: 'GET /api/sites/:id/planning (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/planning`, expect: otherSite },
  { route: 'GET /api/sites/:id/watering-need (member site)', method: 'get', path: (f) => `/api/sites/${f.siteA}/watering-need?days=7`, expect: all(200) },
  { route: 'GET /api/sites/:id/watering-need (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/watering-need`, expect: otherSite },
  { route: 'POST /api/planning/group-heads', method: 'post', path: () => '/api/planning/group-heads', body: groupHeadsBody, expect: all(200) },
];

beforeAll(async () => {
  weather = await startFakeWeatherService({ port: 0 });
  process.env.WEATHER_URL = weather.url;
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
  for (const who of ['admin', 'manager', 'technician', 'owner'] as const) agents[who] = await signedIn(app, f.users[who].email);
  agents.stranger = request.agent(app);
});
afterAll(async () => {
  await tdb.drop();
  await weather.close();
});

describe('every route, tried as each role and as a stranger', () => {
  for (const c of cases) {
    it(`${c.route} answers ${Object.entries(c.expect).map(([w, s]) => `${w} ${s}`).join(', ')}`, async () => {
      const got: Record<string, number> = {};
      for (const who of ['admin', 'manager', 'technician', 'owner', 'stranger'] as const) {
        const path = await c.path(f, tdb);
        let req = agents[who]![c.method](path);
        if (c.body) req = req.send(c.body(f));
        if (c.attach) req = req.attach(...c.attach());
        const res = await req;
        got[who] = res.status;
        if (c.route === 'POST /api/auth/sign-out' && who !== 'stranger') {
          // sign back in so later runs of the matrix keep working
          agents[who] = await signedIn(app, f.users[who].email);
        }
      }
      expect(got).toEqual(c.expect);
    });
  }
});
