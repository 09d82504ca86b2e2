import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import { controllers, sites, zones } from '../../server/db/schema/index';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

type Who = 'admin' | 'manager' | 'technician' | 'owner' | 'stranger';
type Case = {
  route: string;
  method: 'get' | 'post' | 'patch' | 'delete';
  /** Builds the path (and creates what the call consumes, for deletes) before each call. */
  path: (f: Fixture, db: TestDb) => string | Promise<string>;
  body?: (f: Fixture) => object;
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
];

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
  for (const who of ['admin', 'manager', 'technician', 'owner'] as const) agents[who] = await signedIn(app, f.users[who].email);
  agents.stranger = request.agent(app);
});
afterAll(async () => {
  await tdb.drop();
});

describe('every route, tried as each role and as a stranger', () => {
  for (const c of cases) {
    it(`${c.route} answers ${Object.entries(c.expect).map(([w, s]) => `${w} ${s}`).join(', ')}`, async () => {
      const got: Record<string, number> = {};
      for (const who of ['admin', 'manager', 'technician', 'owner', 'stranger'] as const) {
        const path = await c.path(f, tdb);
        let req = agents[who]![c.method](path);
        if (c.body) req = req.send(c.body(f));
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
