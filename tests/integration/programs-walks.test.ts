import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import { eq, sql } from 'drizzle-orm';
import { sites, zones } from '../../server/db/schema/index';
import { startSimulator, type Simulator } from '../../simulator/fleet';
import { sessionCookie, startLiveWorld, until, type LiveWorld } from '../helpers/live';

let w: LiveWorld;
let sim: Simulator;
let mgr: string;
let tech: string;

beforeAll(async () => {
  w = await startLiveWorld();
  await w.tdb.db.update(sites).set({ restrictions: { dayRule: 'any', weekdays: [], noWateringWindows: [{ startMinute: 600, endMinute: 1080 }] } }).where(eq(sites.id, w.f.siteA));
  await w.tdb.db.insert(zones).values({ controllerId: w.f.controllerA, relay: 2, name: 'A2', plantType: 'shrubs', soilTexture: 'loam', headType: 'drip', headCount: 100, flowPerHeadLpm: 0.1, areaM2: 40, rootDepthM: 0.4, efficiency: 0.9 });
  await w.rt.services.fleet.load();
  sim = await startSimulator({ brokerUrl: w.rt.mqttUrl!, boards: w.boards, seed: 5, sampleIntervalMs: 200, samplesPerMessage: 2 });
  await sim.ready();
  await until(() => w.rt.services.fleet.all().every((b) => b.online));
  mgr = await sessionCookie(w.rt.url, w.f.users.manager.email);
  tech = await sessionCookie(w.rt.url, w.f.users.technician.email);
});
afterAll(async () => {
  await sim?.close();
  await w?.close();
});

const post = (path: string, cookie: string, body: object) => request(w.rt.url).post(path).set('cookie', cookie).send(body);
const base = () => ({ name: 'Lawns', startTimes: ['05:00'], dayRule: { kind: 'weekdays', weekdays: [1, 3, 5] }, zones: [{ zoneId: w.f.zoneA, minutes: 20 }] });
const count = async () => (await w.tdb.db.execute(sql`select count(*)::int as n from programs`)).rows[0].n as number;

describe('programs', () => {
  it('saves a program with its cron expressions and next starts in the site’s timezone', async () => {
    const res = await post(`/api/sites/${w.f.siteA}/programs`, mgr, base());
    expect(res.status).toBe(201);
    expect(res.body.crons).toEqual(['0 5 * * 1,3,5']);
    expect(res.body.nextStarts.length).toBeGreaterThan(0);
    for (const t of res.body.nextStarts) {
      const local = new Intl.DateTimeFormat('en-GB', { timeZone: 'America/Denver', hour: '2-digit', minute: '2-digit', weekday: 'short' }).format(new Date(t));
      expect(local).toMatch(/^(Mon|Wed|Fri) 05:00$/);
    }
  });

  it('refuses a start time inside a no-watering window, a zone from another site, zero minutes and no day, and saves nothing', async () => {
    const before = await count();
    const cases: [object, string][] = [
      [{ ...base(), startTimes: ['12:30'] }, 'startTimes.0'],
      [{ ...base(), zones: [{ zoneId: w.f.zoneB, minutes: 10 }] }, 'zones.0.zoneId'],
      [{ ...base(), zones: [{ zoneId: w.f.zoneA, minutes: 0 }] }, 'zones.0.minutes'],
      [{ ...base(), dayRule: { kind: 'weekdays', weekdays: [] } }, 'dayRule.weekdays'],
      [{ ...base(), startTimes: ['25:00'] }, 'startTimes.0'],
      [{ ...base(), activeFrom: '2026-07-01', activeTo: '2026-06-01' }, 'activeTo'],
    ];
    for (const [body, field] of cases) {
      const res = await post(`/api/sites/${w.f.siteA}/programs`, mgr, body);
      expect(res.status, field).toBe(400);
      expect(res.body.error.details.map((d: { path: string }) => d.path)).toContain(field);
    }
    expect(await count()).toBe(before);
  });

  it('warns when a new program overlaps another and says how long it waits', async () => {
    const res = await post(`/api/sites/${w.f.siteA}/programs`, mgr, { ...base(), name: 'Overlapping', startTimes: ['05:10'] });
    expect(res.status).toBe(201);
    const overlap = res.body.warnings.find((x: { code: string }) => x.code === 'overlap');
    expect(overlap.message).toMatch(/Overlaps “Lawns”.*waits about 10 min/);
  });

  it('shows planned slots, restriction windows and litres per day on the 7-day timeline', async () => {
    const res = await request(w.rt.url).get(`/api/sites/${w.f.siteA}/timeline?days=7`).set('cookie', tech);
    expect(res.status).toBe(200);
    expect(res.body.days).toHaveLength(7);
    expect(res.body.windows).toHaveLength(7);
    const planned = res.body.slots.filter((s: { status: string }) => s.status === 'planned');
    expect(planned.length).toBeGreaterThan(0);
    // fixture zone A1: 6 heads × 5 L/min = 30 L/min for 20 min = 600 L a slot
    expect(planned.find((s: { programName: string }) => s.programName === 'Lawns').litres).toBe(600);
    const sum = res.body.days.reduce((a: number, d: { litres: number }) => a + d.litres, 0);
    expect(sum).toBe(Math.round(planned.reduce((a: number, s: { litres: number }) => a + s.litres, 0)));
  });
});

describe('walk test', () => {
  it('walks zones one at a time with next and stop, and saves each result as a service record', async () => {
    const a2 = (await w.tdb.db.select({ id: zones.id }).from(zones).where(eq(zones.name, 'A2')))[0].id;
    const start = await post(`/api/sites/${w.f.siteA}/walks`, tech, { zoneIds: [w.f.zoneA, a2], minutes: 2 });
    expect(start.status).toBe(201);
    expect(start.body.current.id).toBe(w.f.zoneA);
    const board = sim.board('TEST-A-0001');
    await until(() => board.relayStates()[0].open);
    await until(async () => (await request(w.rt.url).get(`/api/walks/${start.body.id}`).set('cookie', tech)).body.results[0].opened);
    await new Promise((r) => setTimeout(r, 700)); // a reading or two with flow
    const next = await post(`/api/walks/${start.body.id}/step`, tech, { action: 'next' });
    expect(next.status).toBe(200);
    expect(next.body.index).toBe(1);
    expect(next.body.results[0].outcome).toBe('ok');
    expect(next.body.results[0].flowSeenLpm).toBeGreaterThan(0);
    await until(() => board.relayStates()[1].open && !board.relayStates()[0].open);
    const stop = await post(`/api/walks/${start.body.id}/step`, tech, { action: 'stop' });
    expect(stop.body.state).toBe('stopped');
    await until(() => board.relayStates().every((r) => !r.open));
    const recs = await request(w.rt.url).get(`/api/zones/${w.f.zoneA}/service-records`).set('cookie', tech);
    expect(recs.body.items[0].kind).toBe('walk_test');
    expect(recs.body.items[0].summary).toMatch(/opened/);
    const bad = await post(`/api/walks/${start.body.id}/step`, tech, { action: 'fly' });
    expect(bad.status).toBe(400);
  });
});
