import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import { DateTime } from 'luxon';
import { and, eq, sql } from 'drizzle-orm';
import { controllers, programZones, programs, runs, sites, weatherDays, zoneRuns, zones } from '../../server/db/schema/index';
import { programCrons, type DayRule } from '../../server/scheduler/calendar';
import { zoneDepletion } from '../../server/scheduler/minutes';
import { wateringNeed } from '../../server/domain/agronomy';
import { sessionCookie } from '../helpers/live';
import { startScheduledWorld, type ScheduledWorld } from '../helpers/scheduled';
import type { TestDb } from '../helpers/db';
import type { Fixture } from '../helpers/fixtures';

const tz = 'America/Denver';
const local = (iso: string) => DateTime.fromISO(iso, { zone: tz }).toMillis();

async function addZones(tdb: TestDb, f: Fixture) {
  // controller A (cap 2, stagger 300 ms): A1 30 L/min (fixture), A2 and A3 10 L/min drip, A4 a clay spray zone for cycle and soak
  await tdb.db.insert(zones).values([
    { controllerId: f.controllerA, relay: 2, name: 'A2 beds', plantType: 'shrubs', soilTexture: 'loam', headType: 'drip', headCount: 100, flowPerHeadLpm: 0.1, areaM2: 40, rootDepthM: 0.4, efficiency: 0.9 },
    { controllerId: f.controllerA, relay: 3, name: 'A3 hedge', plantType: 'shrubs', soilTexture: 'loam', headType: 'drip', headCount: 100, flowPerHeadLpm: 0.1, areaM2: 40, rootDepthM: 0.4, efficiency: 0.9 },
    { controllerId: f.controllerA, relay: 4, name: 'A4 clay slope', plantType: 'cool_season_turf', soilTexture: 'clay', headType: 'spray', headCount: 4, flowPerHeadLpm: 4, areaM2: 30, rootDepthM: 0.15, efficiency: 0.7 },
  ]);
}

/** After a restart the board reconnects in real time; the virtual clock waits for it. */
async function boardBackOnline(w: ScheduledWorld, serial: string) {
  for (let i = 0; i < 100 && !w.rt.services.fleet.all().find((b) => b.serial === serial)?.online; i++) await new Promise((r) => setTimeout(r, 100));
}

async function zoneId(tdb: TestDb, name: string) {
  const [z] = await tdb.db.select({ id: zones.id }).from(zones).where(eq(zones.name, name));
  return z.id;
}

async function addProgram(tdb: TestDb, siteId: number, name: string, startTimes: string[], zs: [number, number][], opts: { dayRule?: DayRule; mode?: 'fixed' | 'seasonal' | 'weather'; cycleSoak?: 'off' | 'auto' } = {}) {
  const dayRule = opts.dayRule ?? { kind: 'weekdays', weekdays: [0, 1, 2, 3, 4, 5, 6] };
  const [p] = await tdb.db.insert(programs).values({ siteId, name, startTimes, dayRule, crons: programCrons({ startTimes, dayRule, activeFrom: null, activeTo: null }), mode: opts.mode ?? 'fixed' }).returning();
  await tdb.db.insert(programZones).values(zs.map(([zoneId, minutes], i) => ({ programId: p.id, zoneId, minutes, position: i + 1, cycleSoak: opts.cycleSoak ?? 'off' })));
  return p.id;
}

const runsOf = (tdb: TestDb, programId: number) => tdb.db.select().from(runs).where(eq(runs.programId, programId)).orderBy(runs.scheduledFor);
const zoneRunsOf = (tdb: TestDb, runId: number) => tdb.db.select().from(zoneRuns).where(eq(zoneRuns.runId, runId)).orderBy(zoneRuns.plannedStart, zoneRuns.id);

describe('scheduler on a virtual clock, with the simulator', { timeout: 90_000 }, () => {
  let w: ScheduledWorld;
  beforeAll(async () => {
    w = await startScheduledWorld(local('2026-06-01T04:50'), async (tdb, f) => {
      await addZones(tdb, f);
      await tdb.db.update(sites).set({ allowParallel: true }).where(eq(sites.id, f.siteA));
    });
  }, 60_000);
  afterAll(async () => {
    await w?.close();
  });

  it('runs two overlapping programs with every relay start at least the stagger apart and the supply never exceeded', async () => {
    const a1 = w.f.zoneA;
    const a2 = await zoneId(w.tdb, 'A2 beds');
    const a3 = await zoneId(w.tdb, 'A3 hedge');
    const p1 = await addProgram(w.tdb, w.f.siteA, 'P1', ['05:00'], [[a1, 5], [a2, 5]]);
    const p2 = await addProgram(w.tdb, w.f.siteA, 'P2', ['05:00'], [[a3, 5]]);
    const board = w.sim.board('TEST-A-0001');
    const before = board.energizeLog.length;
    await w.runUntil(local('2026-06-01T05:30'), 5000);
    const [r1] = await runsOf(w.tdb, p1);
    const [r2] = await runsOf(w.tdb, p2);
    expect(r1.state).toBe('completed');
    expect(r2.state).toBe('completed');
    const zr = [...(await zoneRunsOf(w.tdb, r1.id)), ...(await zoneRunsOf(w.tdb, r2.id))];
    expect(zr.map((z) => z.state)).toEqual(['completed', 'completed', 'completed']);
    // stagger, measured at the board
    const log = board.energizeLog.slice(before).map((e) => e.atMs).sort((a, b) => a - b);
    expect(log.length).toBeGreaterThanOrEqual(3);
    for (let i = 1; i < log.length; i++) expect(log[i] - log[i - 1]).toBeGreaterThanOrEqual(300);
    // commands leave seconds ahead, but no relay is energised before its zone's planned start
    for (const z of zr) {
      const relay = z.zoneId === a1 ? 1 : z.zoneId === a2 ? 2 : 3;
      const first = board.energizeLog.slice(before).find((e) => e.relay === relay && e.atMs >= z.plannedStart.getTime() - 60_000)!;
      expect(first.atMs).toBeGreaterThanOrEqual(z.plannedStart.getTime());
    }
    // supply (usable 48 L/min) and the valve cap of 2, from the recorded actual times
    const flows = new Map([[a1, 30], [a2, 10], [a3, 10]]);
    for (const z of zr) {
      const t = z.actualStart!.getTime() + 1;
      const open = zr.filter((x) => x.actualStart!.getTime() <= t && x.actualEnd!.getTime() > t);
      expect(open.reduce((s, x) => s + flows.get(x.zoneId)!, 0)).toBeLessThanOrEqual(48);
      expect(open.length).toBeLessThanOrEqual(2);
    }
    // nothing left open at the board
    expect(board.relayStates().every((r) => !r.open)).toBe(true);
    await w.tdb.db.update(programs).set({ enabled: false });
  });

  it('splits a clay slope zone into cycles with soak between them that add up to the planned minutes', async () => {
    const a4 = await zoneId(w.tdb, 'A4 clay slope');
    // 4 × 4 L/min on 30 m² = 32 mm/h against clay's 3 mm/h intake: cycle and soak is needed
    const p = await addProgram(w.tdb, w.f.siteA, 'Slope', ['06:00'], [[a4, 12]], { cycleSoak: 'auto' });
    await w.runUntil(local('2026-06-01T09:00'), 30_000);
    const [r] = await runsOf(w.tdb, p);
    const zr = await zoneRunsOf(w.tdb, r.id);
    expect(zr.length).toBeGreaterThan(1);
    expect(zr.reduce((s, z) => s + z.plannedMinutes, 0)).toBeCloseTo(12, 6);
    expect(zr.every((z) => z.state === 'completed')).toBe(true);
    for (let i = 1; i < zr.length; i++) expect(zr[i].actualStart!.getTime()).toBeGreaterThan(zr[i - 1].actualEnd!.getTime());
    await w.tdb.db.update(programs).set({ enabled: false });
  });

  it('skips a start on a day the site does not allow, and one inside a no-watering window, saying why', async () => {
    // Tuesday 2 June: only Mondays allowed
    await w.tdb.db.update(sites).set({ restrictions: { dayRule: 'weekdays', weekdays: [1], noWateringWindows: [{ startMinute: 10 * 60, endMinute: 16 * 60 }] } }).where(eq(sites.id, w.f.siteA));
    const a2 = await zoneId(w.tdb, 'A2 beds');
    const day = await addProgram(w.tdb, w.f.siteA, 'Tuesday', ['05:00'], [[a2, 3]], { dayRule: { kind: 'weekdays', weekdays: [2] } });
    const noon = await addProgram(w.tdb, w.f.siteA, 'Noon', ['11:00'], [[a2, 3]], { dayRule: { kind: 'weekdays', weekdays: [1] } });
    await w.runUntil(local('2026-06-02T06:00'), 3_600_000);
    const [rd] = await runsOf(w.tdb, day);
    expect(rd.state).toBe('skipped_restriction');
    expect(rd.reason).toBe('No watering on Tuesdays at this site');
    const [rn] = await runsOf(w.tdb, noon);
    expect(rn.state).toBe('skipped_restriction');
    expect(rn.reason).toMatch(/No watering between 10:00 and 16:00/);
    const zr = await zoneRunsOf(w.tdb, rn.id);
    expect(zr.every((z) => z.state === 'skipped_restriction')).toBe(true);
    await w.tdb.db.update(sites).set({ restrictions: { dayRule: 'any', weekdays: [], noWateringWindows: [] } }).where(eq(sites.id, w.f.siteA));
    await w.tdb.db.update(programs).set({ enabled: false });
  });

  it('closes every open valve within 2 s when the rain input trips, holds the rest, and waits the rain delay after it dries', async () => {
    await w.tdb.db.update(sites).set({ allowParallel: false, rainDelayHours: 2 }).where(eq(sites.id, w.f.siteA));
    const a1 = w.f.zoneA;
    const a2 = await zoneId(w.tdb, 'A2 beds');
    const start = DateTime.fromMillis(w.clock.now(), { zone: tz }).plus({ minutes: 5 }).startOf('minute');
    const hhmm = start.toFormat('HH:mm');
    const p = await addProgram(w.tdb, w.f.siteA, 'Rainy', [hhmm], [[a1, 10], [a2, 10]]);
    const board = w.sim.board('TEST-A-0001');
    await w.runUntil(start.plus({ minutes: 3 }).toMillis(), 5000);
    expect(board.relayStates().some((r) => r.open)).toBe(true);
    board.setRain(true);
    const tripAt = w.clock.now();
    await w.runFor(2000, 100);
    expect(board.relayStates().every((r) => !r.open)).toBe(true);
    expect(w.clock.now() - tripAt).toBeLessThanOrEqual(2000);
    await w.runFor(30 * 60_000, 60_000);
    const [r] = await runsOf(w.tdb, p);
    expect(r.state).toBe('held_rain');
    const zr = await zoneRunsOf(w.tdb, r.id);
    expect(zr[0].state).toBe('held_rain');
    expect(zr[1].state).toBe('held_rain');
    // dry again: a start within the 2 h delay is held, one after it runs
    board.setRain(false);
    await w.runFor(60_000, 10_000);
    const soon = DateTime.fromMillis(w.clock.now(), { zone: tz }).plus({ minutes: 30 }).startOf('minute');
    const later = soon.plus({ hours: 2 });
    await w.tdb.db.update(programs).set({ enabled: false });
    const p2 = await addProgram(w.tdb, w.f.siteA, 'After rain', [soon.toFormat('HH:mm'), later.toFormat('HH:mm')], [[a2, 2]]);
    await w.runUntil(later.plus({ minutes: 10 }).toMillis(), 60_000);
    const rs = await runsOf(w.tdb, p2);
    expect(rs.map((x) => x.state)).toEqual(['held_rain', 'completed']);
    expect(rs[0].reason).toMatch(/sensor dried/);
    await w.tdb.db.update(programs).set({ enabled: false });
  });

  it('holds runs for a manual rain delay and runs again when it ends', async () => {
    const cookie = await sessionCookie(w.rt.url, w.f.users.owner.email);
    const res = await request(w.rt.url).post(`/api/sites/${w.f.siteA}/rain-delay`).set('cookie', cookie).send({ hours: 3, reason: 'storm forecast' });
    expect(res.status).toBe(201);
    const a2 = await zoneId(w.tdb, 'A2 beds');
    const t0 = DateTime.fromMillis(w.clock.now(), { zone: tz }).startOf('minute');
    const p = await addProgram(w.tdb, w.f.siteA, 'Delayed', [t0.plus({ hours: 1 }).toFormat('HH:mm'), t0.plus({ hours: 4 }).toFormat('HH:mm')], [[a2, 2]]);
    // a technician may not start a zone without saying so; with the override it opens, and that is audited
    const tech = await sessionCookie(w.rt.url, w.f.users.technician.email);
    const refused = await request(w.rt.url).post(`/api/zones/${a2}/start`).set('cookie', tech).send({ minutes: 1 });
    expect(refused.status).toBe(409);
    expect(refused.body.error.code).toBe('rain_hold');
    expect(refused.body.error.message).toMatch(/Rain delay until/);
    const mgr = await sessionCookie(w.rt.url, w.f.users.manager.email);
    expect((await request(w.rt.url).post(`/api/zones/${a2}/start`).set('cookie', mgr).send({ minutes: 1, overrideHold: true })).status).toBe(409);
    const forced = await request(w.rt.url).post(`/api/zones/${a2}/start`).set('cookie', tech).send({ minutes: 1, overrideHold: true });
    expect(forced.status).toBe(202);
    const audit = await w.tdb.db.execute(sql`select count(*)::int as n from audit_log where action = 'valve.hold_override'`);
    expect(audit.rows[0].n).toBe(1);
    await w.runUntil(t0.plus({ hours: 4, minutes: 10 }).toMillis(), 60_000);
    const rs = await runsOf(w.tdb, p);
    expect(rs.map((x) => x.state)).toEqual(['held_rain', 'completed']);
    expect(rs[0].reason).toMatch(/Rain delay until .*storm forecast/);
    await w.tdb.db.update(programs).set({ enabled: false });
  });

  it('sets weather-based minutes from the soil-water depletion', async () => {
    const a2 = await zoneId(w.tdb, 'A2 beds');
    const today = DateTime.fromMillis(w.clock.now(), { zone: tz }).startOf('day');
    // 30 dry days of 6 mm ET₀: the loam bed is well past its readily available water
    await w.tdb.db.delete(weatherDays).where(eq(weatherDays.siteId, w.f.siteA));
    await w.tdb.db.insert(weatherDays).values(Array.from({ length: 30 }, (_, i) => ({
      siteId: w.f.siteA, date: today.minus({ days: 30 - i }).toISODate()!, tmaxC: 32, tminC: 15, rainMm: 0, et0Mm: 6, et0Method: 'test', source: 'manual' as const,
    })));
    const [site] = await w.tdb.db.select().from(sites).where(eq(sites.id, w.f.siteA));
    const [zone] = await w.tdb.db.select().from(zones).where(eq(zones.id, a2));
    const start = today.plus({ days: 1, hours: 5 });
    const dep = await zoneDepletion(w.tdb.db, site, zone, start.toMillis());
    expect(dep.depletionMm).toBeGreaterThanOrEqual(dep.rawMm);
    const need = wateringNeed({ depletionMm: dep.depletionMm, precipitationRateMmH: dep.precipitationRateMmH, efficiency: zone.efficiency, soil: zone.soilTexture, maxCycles: 6 });
    const p = await addProgram(w.tdb, w.f.siteA, 'By weather', ['05:00'], [[a2, 5]], { mode: 'weather', cycleSoak: 'auto' });
    await w.runUntil(start.plus({ minutes: 1 }).toMillis(), 60_000);
    const [r] = await runsOf(w.tdb, p);
    const zr = await zoneRunsOf(w.tdb, r.id);
    expect(zr.reduce((s, z) => s + z.plannedMinutes, 0)).toBeCloseTo(need.minutes, 1);
    // a wet week later the same zone is not watered, and the reason says so
    await w.tdb.db.insert(weatherDays).values({ siteId: w.f.siteA, date: today.plus({ days: 1 }).toISODate()!, tmaxC: 20, tminC: 10, rainMm: 80, et0Mm: 1, et0Method: 'test', source: 'manual' as const }).onConflictDoNothing();
    await w.runUntil(today.plus({ days: 2, hours: 5, minutes: 1 }).toMillis(), 3_600_000);
    const rs = await runsOf(w.tdb, p);
    const second = await zoneRunsOf(w.tdb, rs[rs.length - 1].id);
    expect(second.every((z) => z.state === 'skipped_not_needed')).toBe(true);
    expect(second[0].reason).toMatch(/Not needed yet/);
    await w.tdb.db.update(programs).set({ enabled: false });
  });

  it('holds a zone whose command already waits at the board when a rain delay comes in the last seconds, and cancels it there', async () => {
    const a3 = await zoneId(w.tdb, 'A3 hedge');
    const t0 = DateTime.fromMillis(w.clock.now(), { zone: tz }).startOf('minute');
    const start = t0.plus({ hours: 1 });
    const p = await addProgram(w.tdb, w.f.siteA, 'Late delay', [start.toFormat('HH:mm')], [[a3, 2]]);
    const earlier = (await w.tdb.db.execute(sql`select count(*)::int as n from commands where zone_id = ${a3}`)).rows[0].n as number;
    await w.runUntil(start.toMillis() - 7000, 60_000);
    // prepared: the open command is recorded before the start
    const prepared = await w.tdb.db.execute(sql`select id, state from commands where zone_id = ${a3} order by created_at offset ${earlier}`);
    expect(prepared.rows.map((r) => r.state)).toEqual(['queued']);
    // sent ahead: the board holds it, naming the start, and has not opened the valve
    await w.runUntil(start.toMillis() - 2000, 1000);
    const ahead = await w.tdb.db.execute(sql`select state from commands where id = ${prepared.rows[0].id}`);
    expect(ahead.rows[0].state).toBe('sent');
    expect(w.sim.board('TEST-A-0001').relayStates().find((r) => r.relay === 3)!.open).toBe(false);
    const mgr = await sessionCookie(w.rt.url, w.f.users.manager.email);
    expect((await request(w.rt.url).post(`/api/sites/${w.f.siteA}/rain-delay`).set('cookie', mgr).send({ hours: 1, reason: 'cloudburst' })).status).toBe(201);
    const opensBefore = w.sim.board('TEST-A-0001').energizeLog.length;
    await w.runUntil(start.plus({ minutes: 5 }).toMillis(), 60_000);
    const [r] = await runsOf(w.tdb, p);
    const [zr] = await zoneRunsOf(w.tdb, r.id);
    expect(zr.state).toBe('held_rain');
    expect(zr.reason).toMatch(/Rain delay until .*cloudburst/);
    expect(w.sim.board('TEST-A-0001').energizeLog.length).toBe(opensBefore);
    const after = await w.tdb.db.execute(sql`select state, error from commands where id = ${prepared.rows[0].id}`);
    expect(after.rows[0]).toEqual({ state: 'cancelled', error: 'held by rain before its start; the board never opened it' });
    expect((await request(w.rt.url).delete(`/api/sites/${w.f.siteA}/rain-delay`).set('cookie', mgr)).status).toBe(200);
    await w.tdb.db.update(programs).set({ enabled: false });
  });
});

describe('restarts and several instances', { timeout: 90_000 }, () => {
  let w: ScheduledWorld;
  beforeAll(async () => {
    w = await startScheduledWorld(local('2026-06-03T05:50'), async (tdb, f) => { await addZones(tdb, f); });
  }, 60_000);
  afterAll(async () => {
    await w?.close();
  });

  it('leaves no valve open past its maximum on-time when the server dies mid-run, and a restart doubles no zone run', async () => {
    const a2 = await zoneId(w.tdb, 'A2 beds');
    const a3 = await zoneId(w.tdb, 'A3 hedge');
    const p = await addProgram(w.tdb, w.f.siteA, 'Killed', ['06:00'], [[a2, 10], [a3, 10]]);
    const board = w.sim.board('TEST-A-0001');
    await w.runUntil(local('2026-06-03T06:03'), 5000);
    const open = board.relayStates().find((r) => r.relay === 2)!;
    expect(open.open).toBe(true);
    const closesAt = Date.parse(open.closesAt!);
    // the server goes away without closing anything
    await w.restartServer();
    await w.runUntil(closesAt + 1000, 5000);
    expect(board.relayStates().find((r) => r.relay === 2)!.open).toBe(false);
    await w.runUntil(local('2026-06-03T07:00'), 60_000);
    const rs = await runsOf(w.tdb, p);
    expect(rs).toHaveLength(1);
    const zr = await zoneRunsOf(w.tdb, rs[0].id);
    expect(zr.map((z) => z.zoneId)).toEqual([a2, a3]);
    const dups = await w.tdb.db.execute(sql`select zone_id, count(*)::int as n from zone_runs where run_id = ${rs[0].id} group by zone_id having count(*) > 1`);
    expect(dups.rows).toEqual([]);
    expect(zr[0].state).not.toBe('running');
    expect(board.relayStates().every((r) => !r.open)).toBe(true);
    await w.tdb.db.update(programs).set({ enabled: false });
  });

  it('runs a zone whose command was prepared but never sent once after a restart, under a fresh command', async () => {
    const a2 = await zoneId(w.tdb, 'A2 beds');
    const p = await addProgram(w.tdb, w.f.siteA, 'Prepared', ['07:20'], [[a2, 3]]);
    const board = w.sim.board('TEST-A-0001');
    const opensBefore = board.energizeLog.filter((e) => e.relay === 2).length;
    // eight seconds before the start: prepared (its command recorded, named by the zone run), not yet sent
    await w.runUntil(local('2026-06-03T07:20') - 20_000, 60_000);
    await w.runUntil(local('2026-06-03T07:20') - 8000, 1000);
    const [zr0] = await zoneRunsOf(w.tdb, (await runsOf(w.tdb, p))[0].id);
    expect(zr0.state).toBe('planned');
    expect(zr0.commandId).not.toBeNull();
    await w.restartServer();
    await boardBackOnline(w, 'TEST-A-0001');
    await w.runUntil(local('2026-06-03T07:40'), 5000);
    const [zr] = await zoneRunsOf(w.tdb, (await runsOf(w.tdb, p))[0].id);
    expect([zr.state, zr.reason]).toEqual(['completed', null]);
    expect(zr.commandId).not.toBe(zr0.commandId);
    const old = await w.tdb.db.execute(sql`select state, error from commands where id = ${zr0.commandId}`);
    expect(old.rows[0]).toEqual({ state: 'cancelled', error: 'the server stopped before this command was sent' });
    expect(board.energizeLog.filter((e) => e.relay === 2).length - opensBefore).toBe(1);
    await w.tdb.db.update(programs).set({ enabled: false });
  });

  it('cancels at the board a command sent ahead when the server restarts before its start, and runs the zone once', async () => {
    const a3 = await zoneId(w.tdb, 'A3 hedge');
    const p = await addProgram(w.tdb, w.f.siteA, 'Sent ahead', ['07:50'], [[a3, 3]]);
    const board = w.sim.board('TEST-A-0001');
    const opensBefore = board.energizeLog.filter((e) => e.relay === 3).length;
    const start = local('2026-06-03T07:50');
    await w.runUntil(start - 20_000, 60_000);
    await w.runUntil(start - 7_500, 1000);
    // step until the command has left (3–7 s before the start); the board holds it
    const sentCommand = async () => {
      const [z] = await zoneRunsOf(w.tdb, (await runsOf(w.tdb, p))[0].id);
      const c = z.commandId ? (await w.tdb.db.execute(sql`select state from commands where id = ${z.commandId}`)).rows[0] : undefined;
      return c?.state === 'sent' ? z.commandId : null;
    };
    let first: string | null = null;
    while (!(first = await sentCommand()) && w.clock.now() < start - 2500) await w.runFor(250, 250);
    expect(first).not.toBeNull();
    await w.restartServer();
    await boardBackOnline(w, 'TEST-A-0001');
    await w.runUntil(start + 10 * 60_000, 5000);
    const [zr] = await zoneRunsOf(w.tdb, (await runsOf(w.tdb, p))[0].id);
    expect([zr.state, zr.reason]).toEqual(['completed', null]);
    const old = await w.tdb.db.execute(sql`select state, error from commands where id = ${first}`);
    expect(old.rows[0]).toEqual({ state: 'cancelled', error: 'the server restarted before its start; sent again' });
    expect(board.energizeLog.filter((e) => e.relay === 3).length - opensBefore).toBe(1);
    await w.tdb.db.update(programs).set({ enabled: false });
  });

  it('lets two instances on one database dispatch each slot once, and the second takes over when the first stops', async () => {
    const { startRuntime } = await import('../../server/runtime');
    const { testConfig } = await import('../helpers/config');
    const { schedulerSettings } = await import('../helpers/scheduled');
    const second = await startRuntime(testConfig(w.tdb.url, schedulerSettings), { clock: w.clock });
    try {
      const a2 = await zoneId(w.tdb, 'A2 beds');
      const p = await addProgram(w.tdb, w.f.siteA, 'Twice?', ['08:00', '08:30', '09:00'], [[a2, 1]]);
      await w.runUntil(local('2026-06-03T09:10'), 60_000);
      expect(w.rt.services.scheduler.isLeader !== second.services.scheduler.isLeader, 'exactly one instance dispatches').toBe(true);
      const rs = await runsOf(w.tdb, p);
      expect(rs.map((r) => DateTime.fromJSDate(r.scheduledFor, { zone: tz }).toFormat('HH:mm'))).toEqual(['08:00', '08:30', '09:00']);
      const zr = await w.tdb.db.select().from(zoneRuns).where(and(eq(zoneRuns.zoneId, a2), sql`${zoneRuns.runId} in (select id from runs where program_id = ${p})`));
      expect(zr).toHaveLength(3);
      // the dispatching instance stops: the other takes the lock at its next tick (these worlds tick
      // every 5 virtual minutes, so two of its ticks fit in 11 minutes whatever their phase)
      const leaderWasFirst = w.rt.services.scheduler.isLeader;
      const other = leaderWasFirst ? second : w.rt;
      if (leaderWasFirst) await w.rt.services.scheduler.stop();
      else await second.services.scheduler.stop();
      await w.runFor(11 * 60_000, 30_000);
      expect(other.services.scheduler.isLeader, 'the other instance took over').toBe(true);
    } finally {
      await second.close();
    }
  });
});

void controllers;
