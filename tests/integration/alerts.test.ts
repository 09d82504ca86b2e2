import { afterAll, beforeAll, describe, expect, it, onTestFinished } from 'vitest';
import request from 'supertest';
import { eq, sql } from 'drizzle-orm';
import { startSimulator, type Simulator } from '../../simulator/fleet';
import { sites } from '../../server/db/schema/index';
import { liveClient, sessionCookie, startLiveWorld, until, type LiveClient, type LiveWorld } from '../helpers/live';

let w: LiveWorld;
let sim: Simulator;
let cookies: Record<'manager' | 'owner' | 'technician', string>;
let live: LiveClient;
let ownerLive: LiveClient;

beforeAll(async () => {
  // Short thresholds so each fault shows within seconds.
  w = await startLiveWorld({
    ALERT_TICK_MS: '100', ALERT_OFFLINE_SECONDS: '1', ALERT_STUCK_SECONDS: '1.5', ALERT_FLOW_SECONDS: '1',
    ALERT_FLOW_SETTLE_SECONDS: '0.5', ALERT_VOLTAGE_SECONDS: '1', MAIL_TICK_MS: '3600000',
  });
  await w.tdb.db.update(sites).set({ rainDelayHours: 0 }).where(eq(sites.id, w.f.siteA));
  sim = await startSimulator({ brokerUrl: w.rt.mqttUrl!, boards: w.boards, seed: 11, sampleIntervalMs: 150, samplesPerMessage: 2, reconnectPeriodMs: 300 });
  await sim.ready();
  await until(() => w.rt.services.fleet.all().every((b) => b.online));
  cookies = {
    manager: await sessionCookie(w.rt.url, w.f.users.manager.email),
    owner: await sessionCookie(w.rt.url, w.f.users.owner.email),
    technician: await sessionCookie(w.rt.url, w.f.users.technician.email),
  };
  live = await liveClient(w.rt.url, cookies.manager);
  ownerLive = await liveClient(w.rt.url, cookies.owner);
});
afterAll(async () => {
  live?.close();
  ownerLive?.close();
  await sim?.close();
  await w.close();
});

const api = (who: keyof typeof cookies) => ({
  post: (path: string, body?: object) => request(w.rt.url).post(path).set('cookie', cookies[who]).send(body ?? {}),
  get: (path: string) => request(w.rt.url).get(path).set('cookie', cookies[who]),
});

type Row = { id: number; kind: string; state: string; episode_key: string; site_id: number; zone_id: number | null; resolution: string | null };
const alertsOf = async (kind: string) =>
  (await w.tdb.db.execute<Row>(sql`select id, kind, state::text as state, episode_key, site_id, zone_id, resolution from alerts where kind = ${kind} order by id`)).rows;
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

/** Wait until exactly one alert of the kind exists in the wanted state; then check it stays the only one. */
async function expectOnce(kind: string, state: 'open' | 'resolved', ms = 15_000) {
  await until(async () => {
    const rows = await alertsOf(kind);
    return rows.length === 1 && rows[0].state === state;
  }, ms, 50).catch(async () => {
    throw new Error(`wanted one ${kind} alert ${state}; have ${JSON.stringify(await alertsOf(kind))}`);
  });
  return (await alertsOf(kind))[0];
}

const zoneOpen = (serial: string, relay: number, open: boolean) =>
  until(() => sim.board(serial).relayStates().find((r) => r.relay === relay)?.open === open, 10_000);

describe('alerts from the simulated faults', () => {
  it('raises “controller offline” once when a board drops off, and resolves it when the board is back', async () => {
    const board = sim.board('TEST-B-0001');
    board.setFault({ fault: 'offline', on: true });
    // (generous: under a full parallel suite the last-will and the engine's tick both wait for CPU;
    // and the board comes back even if this test fails, so the tests after it still have it)
    onTestFinished(() => board.setFault({ fault: 'offline', on: false }));
    const raised = await live.waitFor((m) => m.type === 'alert' && m.change === 'raised' && (m.alert as { kind: string }).kind === 'controller_offline', 20_000);
    expect(raised.siteId).toBe(w.f.siteB);
    expect((raised.alert as { severity: string; title: string }).severity).toBe('critical');
    expect((raised.alert as { title: string }).title).toMatch(/Board TEST-B-0001 is offline/);
    await sleep(600); // more ticks while still offline: still one alert
    await expectOnce('controller_offline', 'open');
    board.setFault({ fault: 'offline', on: false });
    const done = await expectOnce('controller_offline', 'resolved', 10_000);
    expect(done.resolution).toMatch(/back online/);
    // the owner of site A never hears of site B's alert
    expect(ownerLive.messages.filter((m) => m.type === 'alert' && m.siteId === w.f.siteB)).toEqual([]);
  });

  it('raises “command failed” once for a board that does not acknowledge, and resolves it at the next acknowledgement', async () => {
    await until(() => w.rt.services.fleet.get('TEST-B-0001')?.online, 8000);
    const board = sim.board('TEST-A-0001');
    board.setFault({ fault: 'no_ack', on: true });
    expect((await api('manager').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 1 })).status).toBe(202);
    const a = await expectOnce('command_failed', 'open');
    expect(a.site_id).toBe(w.f.siteA);
    board.setFault({ fault: 'no_ack', on: false });
    expect((await api('manager').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 1 })).status).toBe(202);
    const done = await expectOnce('command_failed', 'resolved');
    expect(done.resolution).toMatch(/acknowledged/);
    await api('manager').post(`/api/zones/${w.f.zoneA}/stop`);
    await zoneOpen('TEST-A-0001', 1, false);
  });

  it('raises “high flow” once on a broken head while the zone runs, and resolves it when the flow is normal again', async () => {
    expect((await api('manager').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 2 })).status).toBe(202);
    await zoneOpen('TEST-A-0001', 1, true);
    await sleep(800);
    sim.board('TEST-A-0001').setFault({ fault: 'broken_head', on: true, relay: 1 });
    const a = await expectOnce('high_flow', 'open');
    expect(a.episode_key).toBe(`high_flow:zone:${w.f.zoneA}`);
    expect(a.zone_id).toBe(w.f.zoneA);
    await sleep(1200);
    await expectOnce('high_flow', 'open');
    sim.board('TEST-A-0001').setFault({ fault: 'broken_head', on: false, relay: 1 });
    await expectOnce('high_flow', 'resolved');
    expect(await alertsOf('low_flow')).toEqual([]);
  });

  it('raises “low flow” once on a clogged zone, and resolves it when the flow is normal again', async () => {
    sim.board('TEST-A-0001').setFault({ fault: 'clogged', on: true, relay: 1 });
    const a = await expectOnce('low_flow', 'open');
    expect(a.zone_id).toBe(w.f.zoneA);
    await sleep(1200);
    await expectOnce('low_flow', 'open');
    sim.board('TEST-A-0001').setFault({ fault: 'clogged', on: false, relay: 1 });
    await expectOnce('low_flow', 'resolved');
    await api('manager').post(`/api/zones/${w.f.zoneA}/stop`);
    await zoneOpen('TEST-A-0001', 1, false);
  });

  it('raises “valve open when it should be closed” once for a stuck valve, and resolves it when the valve closes', async () => {
    expect((await api('manager').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 2 })).status).toBe(202);
    await zoneOpen('TEST-A-0001', 1, true);
    sim.board('TEST-A-0001').setFault({ fault: 'stuck_valve', on: true, relay: 1 });
    await api('manager').post(`/api/zones/${w.f.zoneA}/stop`);
    const a = await expectOnce('valve_stuck_open', 'open');
    expect(a.episode_key).toBe(`valve_stuck_open:controller:${w.f.controllerA}:relay:1`);
    await sleep(800);
    await expectOnce('valve_stuck_open', 'open');
    sim.board('TEST-A-0001').setFault({ fault: 'stuck_valve', on: false, relay: 1 });
    await zoneOpen('TEST-A-0001', 1, false);
    await expectOnce('valve_stuck_open', 'resolved');
  });

  it('raises “low supply voltage” once, and resolves it when the voltage recovers', async () => {
    sim.board('TEST-B-0001').setFault({ fault: 'low_voltage', on: true });
    await expectOnce('low_voltage', 'open');
    await sleep(600);
    await expectOnce('low_voltage', 'open');
    sim.board('TEST-B-0001').setFault({ fault: 'low_voltage', on: false });
    await expectOnce('low_voltage', 'resolved');
  });

  it('tells of a rain hold starting and ending (information)', async () => {
    sim.board('TEST-A-0001').setRain(true);
    const a = await expectOnce('rain_hold', 'open');
    expect(a.site_id).toBe(w.f.siteA);
    const ev = await ownerLive.waitFor((m) => m.type === 'alert' && (m.alert as { kind: string }).kind === 'rain_hold');
    expect((ev.alert as { severity: string }).severity).toBe('info');
    sim.board('TEST-A-0001').setRain(false);
    await expectOnce('rain_hold', 'resolved');
  });
});

describe('the alerts list', () => {
  it('lists alerts scoped to the person’s sites, with counts for the badge', async () => {
    const mgr = await api('manager').get('/api/alerts?state=all&pageSize=100');
    expect(mgr.status).toBe(200);
    expect(mgr.body.total).toBeGreaterThanOrEqual(7);
    expect(new Set(mgr.body.items.map((a: { siteId: number }) => a.siteId))).toEqual(new Set([w.f.siteA, w.f.siteB]));
    const owner = await api('owner').get('/api/alerts?state=all&pageSize=100');
    expect(owner.body.items.length).toBeGreaterThan(0);
    expect(owner.body.items.every((a: { siteId: number }) => a.siteId === w.f.siteA)).toBe(true);
    expect((await api('owner').get(`/api/alerts?siteId=${w.f.siteB}`)).status).toBe(404);
    const resolved = await api('manager').get('/api/alerts?state=resolved&kind=high_flow,low_flow');
    expect(resolved.body.items.map((a: { kind: string }) => a.kind).sort()).toEqual(['high_flow', 'low_flow']);
    expect(mgr.body.counts).toMatchObject({ open: expect.any(Number), acknowledged: expect.any(Number) });
  });

  it('records who acknowledged an alert and tells the live socket; owners may not acknowledge', async () => {
    sim.board('TEST-A-0001').setFault({ fault: 'low_voltage', on: true });
    const a = await until(async () => (await alertsOf('low_voltage')).find((x) => x.state === 'open' && x.site_id === w.f.siteA));
    const before = (await api('manager').get('/api/alerts')).body.counts.open;
    expect(before).toBeGreaterThanOrEqual(1);
    expect((await api('owner').post(`/api/alerts/${a.id}/acknowledge`)).status).toBe(403);
    const res = await api('technician').post(`/api/alerts/${a.id}/acknowledge`);
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ id: a.id, state: 'acknowledged', acknowledgedBy: { id: w.f.users.technician.id, name: 'Fixture technician' } });
    await live.waitFor((m) => m.type === 'alert' && m.change === 'acknowledged' && (m.alert as { id: number }).id === a.id);
    expect((await api('technician').post(`/api/alerts/${a.id}/acknowledge`)).status).toBe(200);
    expect((await api('manager').get('/api/alerts')).body.counts.open).toBe(before - 1);
    sim.board('TEST-A-0001').setFault({ fault: 'low_voltage', on: false });
    await until(async () => (await alertsOf('low_voltage')).every((x) => x.state === 'resolved'), 8000, 50);
    const after = await api('manager').get(`/api/alerts/${a.id}`);
    expect(after.body).toMatchObject({ state: 'resolved', acknowledgedBy: { id: w.f.users.technician.id } });
    expect((await api('technician').post(`/api/alerts/${a.id}/acknowledge`)).status).toBe(409);
  });
});
