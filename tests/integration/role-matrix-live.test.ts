import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import { eq } from 'drizzle-orm';
import { programZones, programs, zones } from '../../server/db/schema/index';
import { programCrons } from '../../server/scheduler/calendar';
import { startSimulator, type Simulator } from '../../simulator/fleet';
import { sessionCookie, startLiveWorld, until, type LiveWorld } from '../helpers/live';
import type { Fixture } from '../helpers/fixtures';

/** The role × route matrix for the routes that need the live server (valves, schedules, walks, demo). */
type Who = 'admin' | 'manager' | 'technician' | 'owner' | 'stranger';
type Case = {
  route: string;
  method: 'get' | 'post' | 'patch' | 'delete';
  path: (f: Fixture, x: Extra) => string | Promise<string>;
  body?: (f: Fixture, x: Extra) => object;
  expect: Record<Who, number>;
};
type Extra = { programA: number; programB: number; spareProgram: () => Promise<number> };

let w: LiveWorld;
let sim: Simulator;
let x: Extra;
const cookies: Partial<Record<Who, string>> = {};
const all = (n: number, stranger = 401): Record<Who, number> => ({ admin: n, manager: n, technician: n, owner: n, stranger });
const memberOnly = (n: number): Record<Who, number> => ({ admin: n, manager: n, technician: 404, owner: 404, stranger: 401 });

const program = (f: Fixture, zoneId: number) => ({
  name: 'Matrix program', startTimes: ['05:00'], dayRule: { kind: 'weekdays', weekdays: [1, 3, 5] }, zones: [{ zoneId, minutes: 5 }],
});

const cases: Case[] = [
  { route: 'POST /api/zones/:id/start', method: 'post', path: (f) => `/api/zones/${f.zoneA}/start`, body: () => ({ minutes: 1 }), expect: { admin: 202, manager: 202, technician: 202, owner: 403, stranger: 401 } },
  { route: 'POST /api/zones/:id/start (other site)', method: 'post', path: (f) => `/api/zones/${f.zoneB}/start`, body: () => ({ minutes: 1 }), expect: { admin: 202, manager: 202, technician: 404, owner: 404, stranger: 401 } },
  { route: 'POST /api/zones/:id/stop', method: 'post', path: (f) => `/api/zones/${f.zoneA}/stop`, expect: { admin: 202, manager: 202, technician: 202, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/stop', method: 'post', path: (f) => `/api/sites/${f.siteA}/stop`, expect: { admin: 202, manager: 202, technician: 202, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/stop (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/stop`, expect: { admin: 202, manager: 202, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/sites/:id/activity', method: 'get', path: (f) => `/api/sites/${f.siteA}/activity`, expect: all(200) },
  { route: 'GET /api/sites/:id/activity (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/activity`, expect: memberOnly(200) },
  { route: 'GET /api/sites/:id/programs', method: 'get', path: (f) => `/api/sites/${f.siteA}/programs`, expect: all(200) },
  { route: 'GET /api/sites/:id/programs (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/programs`, expect: memberOnly(200) },
  { route: 'POST /api/sites/:id/programs', method: 'post', path: (f) => `/api/sites/${f.siteA}/programs`, body: (f) => program(f, f.zoneA), expect: { admin: 201, manager: 201, technician: 403, owner: 403, stranger: 401 } },
  { route: 'POST /api/sites/:id/programs (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/programs`, body: (f) => program(f, f.zoneB), expect: { admin: 201, manager: 201, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/programs/:id', method: 'get', path: (_f, x) => `/api/programs/${x.programA}`, expect: all(200) },
  { route: 'GET /api/programs/:id (other site)', method: 'get', path: (_f, x) => `/api/programs/${x.programB}`, expect: memberOnly(200) },
  { route: 'PATCH /api/programs/:id', method: 'patch', path: (_f, x) => `/api/programs/${x.programA}`, body: () => ({ name: 'Renamed' }), expect: { admin: 200, manager: 200, technician: 403, owner: 403, stranger: 401 } },
  { route: 'DELETE /api/programs/:id', method: 'delete', path: (_f, x) => x.spareProgram().then((id) => `/api/programs/${id}`), expect: { admin: 204, manager: 204, technician: 403, owner: 403, stranger: 401 } },
  { route: 'GET /api/sites/:id/timeline', method: 'get', path: (f) => `/api/sites/${f.siteA}/timeline`, expect: all(200) },
  { route: 'GET /api/sites/:id/timeline (other site)', method: 'get', path: (f) => `/api/sites/${f.siteB}/timeline`, expect: memberOnly(200) },
  { route: 'GET /api/sites/:id/runs', method: 'get', path: (f) => `/api/sites/${f.siteA}/runs`, expect: all(200) },
  { route: 'GET /api/sites/:id/hold', method: 'get', path: (f) => `/api/sites/${f.siteA}/hold`, expect: all(200) },
  { route: 'POST /api/sites/:id/rain-delay', method: 'post', path: (f) => `/api/sites/${f.siteA}/rain-delay`, body: () => ({ hours: 1 }), expect: { admin: 201, manager: 201, technician: 403, owner: 201, stranger: 401 } },
  { route: 'POST /api/sites/:id/rain-delay (other site)', method: 'post', path: (f) => `/api/sites/${f.siteB}/rain-delay`, body: () => ({ hours: 1 }), expect: { admin: 201, manager: 201, technician: 404, owner: 404, stranger: 401 } },
  { route: 'DELETE /api/sites/:id/rain-delay', method: 'delete', path: (f) => `/api/sites/${f.siteA}/rain-delay`, expect: { admin: 200, manager: 200, technician: 403, owner: 200, stranger: 401 } },
  { route: 'DELETE /api/sites/:id/rain-delay (other site)', method: 'delete', path: (f) => `/api/sites/${f.siteB}/rain-delay`, expect: { admin: 200, manager: 200, technician: 404, owner: 404, stranger: 401 } },
  { route: 'GET /api/zones/:id/service-records', method: 'get', path: (f) => `/api/zones/${f.zoneA}/service-records`, expect: all(200) },
  { route: 'GET /api/zones/:id/service-records (other site)', method: 'get', path: (f) => `/api/zones/${f.zoneB}/service-records`, expect: memberOnly(200) },
  { route: 'POST /api/sites/:id/walks', method: 'post', path: (f) => `/api/sites/${f.siteA}/walks`, body: (f) => ({ zoneIds: [f.zoneA], minutes: 1 }), expect: { admin: 201, manager: 201, technician: 201, owner: 403, stranger: 401 } },
  { route: 'GET /api/demo/simulator/controllers (not in demo mode)', method: 'get', path: () => '/api/demo/simulator/controllers', expect: { admin: 404, manager: 404, technician: 404, owner: 404, stranger: 404 } },
];

beforeAll(async () => {
  w = await startLiveWorld();
  sim = await startSimulator({ brokerUrl: w.rt.mqttUrl!, boards: w.boards, seed: 11, sampleIntervalMs: 1000 });
  await sim.ready();
  await until(() => w.rt.services.fleet.all().every((b) => b.online));
  const mk = async (siteId: number, zoneId: number) => {
    const startTimes = ['05:00'];
    const dayRule = { kind: 'weekdays' as const, weekdays: [1] };
    const [p] = await w.tdb.db.insert(programs).values({ siteId, name: 'Existing', startTimes, dayRule, crons: programCrons({ startTimes, dayRule, activeFrom: null, activeTo: null }) }).returning();
    await w.tdb.db.insert(programZones).values({ programId: p.id, zoneId, minutes: 5, position: 1 });
    return p.id;
  };
  x = { programA: await mk(w.f.siteA, w.f.zoneA), programB: await mk(w.f.siteB, w.f.zoneB), spareProgram: () => mk(w.f.siteA, w.f.zoneA) };
  for (const who of ['admin', 'manager', 'technician', 'owner'] as const) cookies[who] = await sessionCookie(w.rt.url, w.f.users[who].email);
});
afterAll(async () => {
  await sim?.close();
  await w?.close();
});

describe('live routes, tried as each role and as a stranger', () => {
  for (const c of cases) {
    it(`${c.route} answers ${Object.entries(c.expect).map(([k, v]) => `${k} ${v}`).join(', ')}`, async () => {
      const got: Record<string, number> = {};
      for (const who of ['admin', 'manager', 'technician', 'owner', 'stranger'] as const) {
        let req = request(w.rt.url)[c.method](await c.path(w.f, x));
        if (cookies[who as keyof typeof cookies]) req = req.set('cookie', cookies[who as keyof typeof cookies]!);
        if (c.body) req = req.send(c.body(w.f, x));
        got[who] = (await req).status;
        // leave the site quiet for the next caller
        if (c.route.startsWith('POST /api/zones/:id/start') || c.route.startsWith('POST /api/sites/:id/walks')) {
          await request(w.rt.url).post(`/api/sites/${w.f.siteA}/stop`).set('cookie', cookies.admin!);
          await request(w.rt.url).post(`/api/sites/${w.f.siteB}/stop`).set('cookie', cookies.admin!);
          await request(w.rt.url).delete(`/api/sites/${w.f.siteA}/rain-delay`).set('cookie', cookies.admin!);
        }
        if (c.route.startsWith('POST /api/sites/:id/rain-delay')) {
          await request(w.rt.url).delete(`/api/sites/${w.f.siteA}/rain-delay`).set('cookie', cookies.admin!);
          await request(w.rt.url).delete(`/api/sites/${w.f.siteB}/rain-delay`).set('cookie', cookies.admin!);
        }
      }
      expect(got).toEqual(c.expect);
    });
  }
});

void eq;
void zones;
