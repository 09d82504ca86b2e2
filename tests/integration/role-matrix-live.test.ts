import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import { eq } from 'drizzle-orm';
import { controllers, programZones, programs } from '../../server/db/schema/index';
import { programCrons } from '../../server/scheduler/calendar';
import { startSimulator, type Simulator } from '../../simulator/fleet';
import { sessionCookie, startLiveWorld, until, type LiveWorld } from '../helpers/live';
import { hitsRoute } from '../helpers/route-coverage';
import { liveCases, type LiveExtra, type Who } from '../helpers/role-matrix-live-cases';

/** The role × route matrix for the routes that need the live server; the table is in tests/helpers/role-matrix-live-cases.ts. */
let w: LiveWorld;
let sim: Simulator;
let x: LiveExtra;
const cookies: Partial<Record<Who, string>> = {};

beforeAll(async () => {
  // Demo mode, with the simulator's control API, so the demo fleet's routes answer for real.
  w = await startLiveWorld({ RUNNEL_DEMO: '1' });
  sim = await startSimulator({ brokerUrl: w.rt.mqttUrl!, boards: w.boards, seed: 11, sampleIntervalMs: 1000, controlPort: 0 });
  await sim.ready();
  w.rt.services.demo.simulatorUrl = sim.controlUrl;
  await until(() => w.rt.services.fleet.all().every((b) => b.online));
  const mk = async (siteId: number, zoneId: number) => {
    const startTimes = ['05:00'];
    const dayRule = { kind: 'weekdays' as const, weekdays: [1] };
    const [p] = await w.tdb.db.insert(programs).values({ siteId, name: 'Existing', startTimes, dayRule, crons: programCrons({ startTimes, dayRule, activeFrom: null, activeTo: null }) }).returning();
    await w.tdb.db.insert(programZones).values({ programId: p.id, zoneId, minutes: 5, position: 1 });
    return p.id;
  };
  for (const who of ['admin', 'manager', 'technician', 'owner'] as const) cookies[who] = await sessionCookie(w.rt.url, w.f.users[who].email);
  const spareWalk = async (siteId: number, running: boolean) => {
    const zoneId = siteId === w.f.siteA ? w.f.zoneA : w.f.zoneB;
    const started = await request(w.rt.url).post(`/api/sites/${siteId}/walks`).set('cookie', cookies.admin!).send({ zoneIds: [zoneId], minutes: 1 });
    if (started.status !== 201) throw new Error(`walk not started: ${started.status} ${JSON.stringify(started.body)}`);
    if (!running) await request(w.rt.url).post(`/api/walks/${started.body.id}/step`).set('cookie', cookies.admin!).send({ action: 'stop' });
    return started.body.id as string;
  };
  x = {
    programA: await mk(w.f.siteA, w.f.zoneA), programB: await mk(w.f.siteB, w.f.zoneB), spareProgram: () => mk(w.f.siteA, w.f.zoneA),
    spareWalk, serialA: (await w.tdb.db.select().from(controllers).where(eq(controllers.id, w.f.controllerA)))[0].serial,
  };
});
afterAll(async () => {
  await sim?.close();
  await w?.close();
});

describe('live routes, tried as each role and as a stranger', () => {
  for (const c of liveCases) {
    it(`${c.route} answers ${Object.entries(c.expect).map(([k, v]) => `${k} ${v}`).join(', ')}`, async () => {
      const got: Record<string, number> = {};
      for (const who of ['admin', 'manager', 'technician', 'owner', 'stranger'] as const) {
        const path = await c.path(w.f, x);
        expect(hitsRoute(c.route, c.method, path), `${c.method} ${path} is not ${c.route}`).toBe(true);
        let req = request(w.rt.url)[c.method](path);
        if (cookies[who as keyof typeof cookies]) req = req.set('cookie', cookies[who as keyof typeof cookies]!);
        if (c.body) req = req.send(c.body(w.f, x));
        got[who] = (await req).status;
        // leave the site quiet for the next caller
        if (/^(POST \/api\/zones\/:id\/start|POST \/api\/sites\/:id\/walks|POST \/api\/walks\/:id\/step)/.test(c.route)) {
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

