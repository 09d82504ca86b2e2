import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import { controllers, siteMembers, sites, weatherDays, zones } from '../../server/db/schema/index';
import { startFakeWeatherService, type FakeWeatherService } from '../../server/weather/fake-service';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { PASSWORD, seedFixture, type Fixture } from '../helpers/fixtures';
import { hitsRoute, mountedRoutes, routeOf } from '../helpers/route-coverage';
import { liveCases } from '../helpers/role-matrix-live-cases';

type Who = 'admin' | 'manager' | 'technician' | 'owner' | 'stranger';
type Case = {
  route: string;
  method: 'get' | 'post' | 'put' | 'patch' | 'delete';
  /** Builds the path (and creates what the call consumes, for deletes) before each call. */
  path: (f: Fixture, db: TestDb) => string | Promise<string>;
  body?: (f: Fixture, who: Who) => object;
  /** A file sent as multipart/form-data (field, bytes, file name). */
  attach?: () => [string, Buffer, string];
  expect: Record<Who, number>;
};

let tdb: TestDb;
let app: Express;
let f: Fixture;
const agents: Partial<Record<Who, ReturnType<typeof request.agent>>> = {};
let serialNo = 0;

/** A site with no controllers; `members` (user ids) may see it. */
async function spareSite(db: TestDb, members: number[] = []) {
  const [s] = await db.db
    .insert(sites)
    .values({ name: 'Spare', timezone: 'UTC', latitude: 0, longitude: 0, supplyFlowLpm: 40, staticPressureKPa: 300 })
    .returning();
  if (members.length) await db.db.insert(siteMembers).values(members.map((userId) => ({ siteId: s.id, userId })));
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

// --- helpers for the issue 7 rows ---
let firmNo = 0;
let lastSpareZone = 0;
const adminOnly = (n: number): Record<Who, number> => ({ admin: n, manager: 403, technician: 403, owner: 403, stranger: 401 });
const PNG_2X2 = Buffer.from('iVBORw0KGgoAAAANSUhEUgAAAAIAAAACCAIAAAD91JpzAAAADklEQVR4nGOoBwMGCAUAKboF9Rf06ToAAAAASUVORK5CYII=', 'base64');
const planPng = (): [string, Buffer, string] => ['file', PNG_2X2, 'plan.png'];
const zonesCsv = (): [string, Buffer, string] => [
  'file',
  Buffer.from('controller_serial,relay,name,plant_type,soil_texture,head_type,head_count,flow_per_head_lpm,area_m2,root_depth_m\nTEST-A-0001,6,Imported,shrubs,loam,drip,10,0.5,10,0.4\n'),
  'zones.csv',
];

export const cases: Case[] = [
  { route: 'GET /api/health', method: 'get', path: () => '/api/health', expect: all(200, 200) },
  // Each role signs in with its own password; the stranger tries an address with no account.
  { route: 'POST /api/auth/sign-in', method: 'post', path: () => '/api/auth/sign-in', body: (f, who) => (who === 'stranger' ? { email: 'stranger@matrix.test', password: PASSWORD } : { email: f.users[who].email, password: PASSWORD }), expect: all(200, 401) },
  { route: 'GET /api/auth/me', method: 'get', path: () => '/api/auth/me', expect: all(200) },
  { route: 'PATCH /api/auth/me', method: 'patch', path: () => '/api/auth/me', body: () => ({ unitSystem: 'metric' }), expect: all(200) },
  { route: 'GET /api/sites', method: 'get', path: () => '/api/sites', expect: all(200) },
  { route: 'POST /api/sites', method: 'post', path: () => '/api/sites', body: newSite, expect: { admin: 201, manager: 403, technician: 403, owner: 403, stranger: 401 } },
  { route: 'GET /api/sites/:id (member site)', method: 'get', path: (f) => `/api/sites/${f.siteA}`, expect: all(200) },
  { route: 'GET /api/sites/:id (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}`, expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'PATCH /api/sites/:id (member site)', method: 'patch', path: (f) => `/api/sites/${f.siteA}`, body: () => ({ notes: 'checked' }), expect: { admin: 200, manager: 200, technician: 403, owner: 403, stranger: 401 } },
  { route: 'PATCH /api/sites/:id (other site)', method: 'patch', path: (f) => `/api/sites/${f.siteB}`, body: () => ({ notes: 'checked' }), expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'DELETE /api/sites/:id (other site)', method: 'delete', path: (_f, db) => spareSite(db).then((id) => `/api/sites/${id}`), expect: { admin: 204, manager: 403, technician: 404, owner: 404, stranger: 401 } },
  { route: 'DELETE /api/sites/:id (member site)', method: 'delete', path: (f, db) => spareSite(db, [f.users.technician.id, f.users.owner.id]).then((id) => `/api/sites/${id}`), expect: { admin: 204, manager: 403, technician: 403, owner: 403, stranger: 401 } },
  { route: 'GET /api/controllers', method: 'get', path: () => '/api/controllers', expect: all(200) },
  { route: 'GET /api/controllers?siteId (member site)', method: 'get', path: (f) => `/api/controllers?siteId=${f.siteA}`, expect: all(200) },
  { route: 'GET /api/controllers?siteId (other site)', method: 'get', path: (f) => `/api/controllers?siteId=${f.siteB}`, expect: otherSite },
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
  // history, alerts and mail (issue 6)
  { route: 'GET /api/history/zone-runs', method: 'get', path: () => '/api/history/zone-runs', expect: all(200) },
  { route: 'GET /api/history/zone-runs?siteId (other site)', method: 'get', path: (f) => `/api/history/zone-runs?siteId=${f.siteB}`, expect: otherSite },
  { route: 'GET /api/history/zone-runs.csv', method: 'get', path: (f) => `/api/history/zone-runs.csv?siteId=${f.siteA}`, expect: all(200) },
  { route: 'GET /api/history/zone-runs.csv (other site)', method: 'get', path: (f) => `/api/history/zone-runs.csv?siteId=${f.siteB}`, expect: otherSite },
  { route: 'GET /api/history/water-use (member site)', method: 'get', path: (f) => `/api/history/water-use?siteId=${f.siteA}&bucket=week`, expect: all(200) },
  { route: 'GET /api/history/water-use (other site)', method: 'get', path: (f) => `/api/history/water-use?siteId=${f.siteB}`, expect: otherSite },
  { route: 'GET /api/controllers/:id/readings (member site)', method: 'get', path: (f) => `/api/controllers/${f.controllerA}/readings?points=50`, expect: all(200) },
  { route: 'GET /api/controllers/:id/readings (other site)', method: 'get', path: (f) => `/api/controllers/${f.controllerB}/readings`, expect: otherSite },
  { route: 'GET /api/sites/:id/review (member site)', method: 'get', path: (f) => `/api/sites/${f.siteA}/review`, expect: all(200) },
  { route: 'GET /api/sites/:id/review (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/review`, expect: otherSite },
  { route: 'GET /api/alerts', method: 'get', path: () => '/api/alerts?state=all', expect: all(200) },
  { route: 'GET /api/alerts/:id (member site)', method: 'get', path: (f, db) => spareAlert(db, f.siteA).then((id) => `/api/alerts/${id}`), expect: all(200) },
  { route: 'GET /api/alerts/:id (other site)', method: 'get', path: (f, db) => spareAlert(db, f.siteB).then((id) => `/api/alerts/${id}`), expect: otherSite },
  { route: 'POST /api/alerts/:id/acknowledge (member site)', method: 'post', path: (f, db) => spareAlert(db, f.siteA).then((id) => `/api/alerts/${id}/acknowledge`), expect: { admin: 200, manager: 200, technician: 200, owner: 403, stranger: 401 } },
  { route: 'POST /api/alerts/:id/acknowledge (other site)', method: 'post', path: (f, db) => spareAlert(db, f.siteB).then((id) => `/api/alerts/${id}/acknowledge`), expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/me/mail-preferences', method: 'get', path: () => '/api/me/mail-preferences', expect: all(200) },
  { route: 'PUT /api/me/mail-preferences', method: 'put', path: () => '/api/me/mail-preferences', body: () => ({ alertKinds: ['controller_offline'], alertDelivery: 'daily_digest', weeklySummary: false }), expect: all(200) },
  { route: 'GET /api/mail/outbox (not in demo mode)', method: 'get', path: () => '/api/mail/outbox', expect: all(404, 404) },
  // running the firm (issue 7): people, audit, plans, zones CSV, provisioning, service records, tokens, webhooks, OpenAPI
  { route: 'GET /api/users', method: 'get', path: () => '/api/users', expect: adminOnly(200) },
  { route: 'POST /api/users/invitations', method: 'post', path: () => '/api/users/invitations', body: (f) => ({ email: `matrix-${++firmNo}@invite.test`, name: 'Invited', role: 'owner', siteIds: [f.siteA] }), expect: adminOnly(201) },
  { route: 'POST /api/users/:id/invitation/resend', method: 'post', path: (_f, db) => spareInvitee(db).then((id) => `/api/users/${id}/invitation/resend`), expect: adminOnly(200) },
  { route: 'DELETE /api/users/:id/invitation', method: 'delete', path: (_f, db) => spareInvitee(db).then((id) => `/api/users/${id}/invitation`), expect: adminOnly(200) },
  { route: 'PATCH /api/users/:id', method: 'patch', path: (_f, db) => spareInvitee(db).then((id) => `/api/users/${id}`), body: () => ({ name: 'Renamed person' }), expect: adminOnly(200) },
  { route: 'POST /api/auth/accept-invite (unknown link)', method: 'post', path: () => '/api/auth/accept-invite', body: () => ({ token: 'n'.repeat(43), password: 'long enough password' }), expect: all(400, 400) },
  { route: 'POST /api/auth/password-reset', method: 'post', path: () => '/api/auth/password-reset', body: () => ({ email: `reset-${++firmNo}@nowhere.test` }), expect: all(202, 202) },
  { route: 'POST /api/auth/password-reset/confirm (unknown link)', method: 'post', path: () => '/api/auth/password-reset/confirm', body: () => ({ token: 'n'.repeat(43), password: 'long enough password' }), expect: all(400, 400) },
  { route: 'GET /api/audit', method: 'get', path: () => '/api/audit', expect: all(200) },
  { route: 'POST /api/sites/:id/plan (member site)', method: 'post', path: (f) => `/api/sites/${f.siteA}/plan`, attach: planPng, expect: { admin: 201, manager: 201, technician: 201, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/plan (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/plan`, attach: planPng, expect: { admin: 201, manager: 201, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/sites/:id/plan (member site)', method: 'get', path: (f) => `/api/sites/${f.siteA}/plan`, expect: all(200) },
  { route: 'GET /api/sites/:id/plan (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/plan`, expect: otherSite },
  { route: 'GET /api/sites/:id/plan/markers (member site)', method: 'get', path: (f) => `/api/sites/${f.siteA}/plan/markers`, expect: all(200) },
  { route: 'GET /api/sites/:id/plan/markers (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/plan/markers`, expect: otherSite },
  { route: 'PUT /api/sites/:id/plan/markers (member site)', method: 'put', path: (f) => `/api/sites/${f.siteA}/plan/markers`, body: (f) => ({ markers: [{ zoneId: f.zoneA, x: 0.5, y: 0.5 }] }), expect: writers },
  { route: 'PUT /api/sites/:id/plan/markers (other site)', method: 'put', path: (f) => `/api/sites/${f.siteB}/plan/markers`, body: (f) => ({ markers: [{ zoneId: f.zoneB, x: 0.5, y: 0.5 }] }), expect: otherSite },
  { route: 'GET /api/zones/template.csv', method: 'get', path: () => '/api/zones/template.csv', expect: all(200) },
  { route: 'GET /api/sites/:id/zones.csv (member site)', method: 'get', path: (f) => `/api/sites/${f.siteA}/zones.csv`, expect: all(200) },
  { route: 'GET /api/sites/:id/zones.csv (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/zones.csv`, expect: otherSite },
  { route: 'POST /api/sites/:id/zones/import (member site)', method: 'post', path: (f) => `/api/sites/${f.siteA}/zones/import?dryRun=1`, attach: zonesCsv, expect: { admin: 200, manager: 200, technician: 403, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/zones/import (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/zones/import?dryRun=1`, attach: zonesCsv, expect: otherSite },
  { route: 'POST /api/sites/:id/controllers/provision (member site)', method: 'post', path: (f) => `/api/sites/${f.siteA}/controllers/provision`, body: () => ({ name: 'Provisioned', relayCount: 4 }), expect: { admin: 201, manager: 403, technician: 403, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/controllers/provision (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/controllers/provision`, body: () => ({ name: 'Provisioned', relayCount: 4 }), expect: { admin: 201, manager: 403, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/controllers/:id/setup-sheet (member site)', method: 'get', path: (f) => `/api/controllers/${f.controllerA}/setup-sheet`, expect: { admin: 200, manager: 200, technician: 200, owner: 403, stranger: 401 } },
  { route: 'GET /api/controllers/:id/setup-sheet (other site)', method: 'get', path: (f) => `/api/controllers/${f.controllerB}/setup-sheet`, expect: otherSite },
  { route: 'POST /api/controllers/:id/setup-sheet (not its secret)', method: 'post', path: (f) => `/api/controllers/${f.controllerA}/setup-sheet`, body: () => ({ secret: 'not-the-secret-at-all' }), expect: { admin: 400, manager: 403, technician: 403, owner: 403, stranger: 401 } },
  { route: 'POST /api/controllers/:id/rotate-secret (member site)', method: 'post', path: (f, db) => spareController(db, f.siteA).then((id) => `/api/controllers/${id}/rotate-secret`), expect: { admin: 200, manager: 403, technician: 403, owner: 403, stranger: 401 } },
  { route: 'POST /api/controllers/:id/rotate-secret (other site)', method: 'post', path: (f, db) => spareController(db, f.siteB).then((id) => `/api/controllers/${id}/rotate-secret`), expect: { admin: 200, manager: 403, technician: 404, owner: 404, stranger: 401 } },
  { route: 'POST /api/controllers/:id/retire', method: 'post', path: (f, db) => spareController(db, f.siteA).then((id) => `/api/controllers/${id}/retire`), expect: { admin: 200, manager: 403, technician: 403, owner: 403, stranger: 401 } },
  { route: 'POST /api/controllers/:id/move', method: 'post', path: (f, db) => spareController(db, f.siteA).then((id) => `/api/controllers/${id}/move`), body: (f) => ({ siteId: f.siteB }), expect: { admin: 200, manager: 403, technician: 403, owner: 403, stranger: 401 } },
  { route: 'GET /api/controllers/:id/relays (member site)', method: 'get', path: (f) => `/api/controllers/${f.controllerA}/relays`, expect: all(200) },
  { route: 'GET /api/controllers/:id/relays (other site)', method: 'get', path: (f) => `/api/controllers/${f.controllerB}/relays`, expect: otherSite },
  { route: 'PUT /api/controllers/:id/relays', method: 'put', path: (f, db) => spareWiredController(db, f.siteA).then((id) => `/api/controllers/${id}/relays`), body: () => ({ map: [{ relay: 2, zoneId: lastSpareZone }] }), expect: { admin: 200, manager: 200, technician: 403, owner: 403, stranger: 401 } },
  { route: 'POST /api/zones/:id/service-records (member site)', method: 'post', path: (f) => `/api/zones/${f.zoneA}/service-records`, body: () => ({ summary: 'Checked the valve' }), expect: { admin: 201, manager: 201, technician: 201, owner: 403, stranger: 401 } },
  { route: 'POST /api/zones/:id/service-records (other site)', method: 'post', path: (f) => `/api/zones/${f.zoneB}/service-records`, body: () => ({ summary: 'Checked the valve' }), expect: { admin: 201, manager: 201, technician: 404, owner: 404, stranger: 401 } },
  { route: 'POST /api/controllers/:id/service-records (member site)', method: 'post', path: (f) => `/api/controllers/${f.controllerA}/service-records`, body: () => ({ summary: 'Cleaned the enclosure' }), expect: { admin: 201, manager: 201, technician: 201, owner: 403, stranger: 401 } },
  { route: 'GET /api/controllers/:id/service-records (member site)', method: 'get', path: (f) => `/api/controllers/${f.controllerA}/service-records`, expect: all(200) },
  { route: 'GET /api/controllers/:id/service-records (other site)', method: 'get', path: (f) => `/api/controllers/${f.controllerB}/service-records`, expect: otherSite },
  { route: 'GET /api/service-records/:id/photos/:n (member site)', method: 'get', path: (f) => sparePhoto(f.zoneA), expect: all(200) },
  { route: 'GET /api/service-records/:id/photos/:n (other site)', method: 'get', path: (f) => sparePhoto(f.zoneB), expect: otherSite },
  { route: 'GET /api/tokens', method: 'get', path: () => '/api/tokens', expect: adminOnly(200) },
  { route: 'POST /api/tokens', method: 'post', path: () => '/api/tokens', body: (f) => ({ name: 'Matrix token', role: 'owner', siteIds: [f.siteA] }), expect: adminOnly(201) },
  { route: 'DELETE /api/tokens/:id', method: 'delete', path: (_f, db) => spareToken(db).then((id) => `/api/tokens/${id}`), expect: adminOnly(204) },
  { route: 'GET /api/webhooks', method: 'get', path: () => '/api/webhooks', expect: adminOnly(200) },
  { route: 'POST /api/webhooks', method: 'post', path: () => '/api/webhooks', body: (f) => ({ siteId: f.siteA, url: 'https://hooks.example.test/runnel', events: ['valve'] }), expect: adminOnly(201) },
  { route: 'GET /api/webhooks/:id', method: 'get', path: (_f, db) => spareWebhook(db).then((id) => `/api/webhooks/${id}`), expect: adminOnly(200) },
  { route: 'PATCH /api/webhooks/:id', method: 'patch', path: (_f, db) => spareWebhook(db).then((id) => `/api/webhooks/${id}`), body: () => ({ enabled: false }), expect: adminOnly(200) },
  { route: 'DELETE /api/webhooks/:id', method: 'delete', path: (_f, db) => spareWebhook(db).then((id) => `/api/webhooks/${id}`), expect: adminOnly(204) },
  { route: 'GET /api/webhooks/:id/deliveries', method: 'get', path: (_f, db) => spareWebhook(db).then((id) => `/api/webhooks/${id}/deliveries`), expect: adminOnly(200) },
  { route: 'GET /api/openapi.json', method: 'get', path: () => '/api/openapi.json', expect: all(200) },
  // The demo fleet's controls do not exist outside demo mode, for anyone (in demo mode: role-matrix-live).
  { route: 'GET /api/demo/simulator/controllers (not in demo mode)', method: 'get', path: () => '/api/demo/simulator/controllers', expect: all(404, 404) },
  { route: 'POST /api/demo/simulator/controllers/:serial/rain (not in demo mode)', method: 'post', path: () => '/api/demo/simulator/controllers/TEST-A-0001/rain', body: () => ({ tripped: false }), expect: all(404, 404) },
  { route: 'POST /api/demo/simulator/controllers/:serial/faults (not in demo mode)', method: 'post', path: () => '/api/demo/simulator/controllers/TEST-A-0001/faults', body: () => ({ fault: 'low_voltage', on: false }), expect: all(404, 404) },
];

/**
 * Routes the matrices do not try, each with the reason. Empty today: every mounted route has a
 * row here or in tests/helpers/role-matrix-live-cases.ts. A route added here must say why it
 * cannot be tried as each role.
 */
const notTried: Record<string, string> = {};

/** A person invited but not yet activated. */
async function spareInvitee(db: TestDb): Promise<number> {
  const r = await db.pool.query(`insert into users (email, name, role) values ($1, 'Invitee', 'owner') returning id`, [`invitee-${++firmNo}@matrix.test`]);
  return r.rows[0].id as number;
}
/** A spare controller with one zone on relay 4 (its id in lastSpareZone). */
async function spareWiredController(db: TestDb, siteId: number): Promise<number> {
  const id = await spareController(db, siteId);
  lastSpareZone = await spareZone(db, id);
  return id;
}
async function spareToken(db: TestDb): Promise<number> {
  const r = await db.pool.query(`insert into api_tokens (name, role, prefix, token_hash) values ('Spare', 'manager', 'rnt_spare', $1) returning id`, [`${++firmNo}`.padStart(64, '0')]);
  return r.rows[0].id as number;
}
async function spareWebhook(db: TestDb): Promise<number> {
  const r = await db.pool.query(`insert into webhooks (url, events, secret) values ('https://hooks.example.test/spare', '["valve"]', 'whsec_spare') returning id`);
  return r.rows[0].id as number;
}
/** A service record with one photo on the zone, uploaded by the admin; the path of that photo. */
async function sparePhoto(zoneId: number): Promise<string> {
  const res = await agents.admin!.post(`/api/zones/${zoneId}/service-records`).field('summary', 'Photo for the matrix').attach('photos', PNG_2X2, 'photo.png');
  return res.body.photos[0].url as string;
}

/** An open alert at a site, made afresh for each call (so each role can acknowledge one). */
async function spareAlert(db: TestDb, siteId: number): Promise<number> {
  const r = await db.pool.query(
    `insert into alerts (site_id, kind, severity, episode_key, title, message, opened_at, last_seen_at)
     values ($1, 'low_voltage', 'warning', 'low_voltage:matrix:' || gen_random_uuid(), 'Matrix alert', 'Made by the role matrix', now(), now()) returning id`,
    [siteId],
  );
  return r.rows[0].id as number;
}

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
        expect(hitsRoute(c.route, c.method, path), `${c.method} ${path} is not ${c.route}`).toBe(true);
        let req = agents[who]![c.method](path);
        if (c.body) req = req.send(c.body(f, who));
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

describe('the two matrices together', () => {
  const tried = new Set([...cases, ...liveCases].map((c) => routeOf(c.route)));

  it('try every route the app mounts', () => {
    const mounted = mountedRoutes(app);
    expect(mounted.length).toBeGreaterThan(90);
    expect(mounted.filter((r) => !tried.has(r) && !(r in notTried)), 'mounted but in no matrix row').toEqual([]);
  });

  it('name only routes that exist, and exclude none they also try', () => {
    const mounted = mountedRoutes(app);
    expect([...tried].filter((r) => !mounted.includes(r)), 'a row names a route the app does not mount').toEqual([]);
    expect(Object.keys(notTried).filter((r) => !mounted.includes(r) || tried.has(r))).toEqual([]);
  });

  it('read each row label as the route it names', () => {
    expect(routeOf('GET /api/zones?siteId (other site)')).toBe('GET /api/zones');
    expect(hitsRoute('GET /api/zones/:id (member site)', 'get', '/api/zones/12')).toBe(true);
    expect(hitsRoute('GET /api/zones/:id', 'get', '/api/zones/12/service-records')).toBe(false);
    expect(hitsRoute('GET /api/zones/:id', 'delete', '/api/zones/12')).toBe(false);
    expect(hitsRoute('GET /api/history/zone-runs.csv', 'get', '/api/history/zone-runsXcsv')).toBe(false);
  });
});
