import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import { sql } from 'drizzle-orm';
import { startSimulator, type Simulator } from '../../simulator/fleet';
import { liveClient, sessionCookie, startLiveWorld, until, type LiveWorld } from '../helpers/live';
import { zones } from '../../server/db/schema/index';

let w: LiveWorld;
let sim: Simulator;
let cookies: Record<'admin' | 'manager' | 'technician' | 'owner', string>;

beforeAll(async () => {
  w = await startLiveWorld();
  // a second and third zone on board A, so parallel starts can be measured
  await w.tdb.db.insert(zones).values([2, 3].map((relay) => ({
    controllerId: w.f.controllerA, relay, name: `Zone A${relay}`, plantType: 'shrubs' as const, soilTexture: 'loam' as const,
    headType: 'drip' as const, headCount: 50, flowPerHeadLpm: 0.1, areaM2: 20, rootDepthM: 0.4, efficiency: 0.9,
  })));
  await w.rt.services.fleet.load();
  sim = await startSimulator({ brokerUrl: w.rt.mqttUrl!, boards: w.boards, seed: 7, sampleIntervalMs: 200, samplesPerMessage: 5 });
  await sim.ready();
  await until(() => w.rt.services.fleet.all().every((b) => b.online));
  cookies = {
    admin: await sessionCookie(w.rt.url, w.f.users.admin.email),
    manager: await sessionCookie(w.rt.url, w.f.users.manager.email),
    technician: await sessionCookie(w.rt.url, w.f.users.technician.email),
    owner: await sessionCookie(w.rt.url, w.f.users.owner.email),
  };
});
afterAll(async () => {
  await sim?.close();
  await w.close();
});

const api = (who: keyof typeof cookies) => ({
  post: (path: string, body?: object) => request(w.rt.url).post(path).set('cookie', cookies[who]).send(body ?? {}),
  get: (path: string) => request(w.rt.url).get(path).set('cookie', cookies[who]),
});
const zoneIdOnA = async (relay: number) =>
  (await w.tdb.db.execute(sql`select id from zones where controller_id = ${w.f.controllerA} and relay = ${relay}`)).rows[0].id as number;

describe('manual valve control', () => {
  it('opens a zone started through the API on the simulated board, and the event reaches a WebSocket client', async () => {
    const live = await liveClient(w.rt.url, cookies.manager);
    await live.waitFor((m) => m.type === 'snapshot');
    const res = await api('technician').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 2 });
    expect(res.status).toBe(202);
    expect(res.body.commandId).toMatch(/^[0-9a-f-]{36}$/);
    const ev = await live.waitFor((m) => m.type === 'valve' && m.zoneId === w.f.zoneA && m.open === true);
    expect(ev).toMatchObject({ siteId: w.f.siteA, controllerId: w.f.controllerA, source: 'command' });
    expect(typeof ev.at).toBe('string');
    expect(sim.board('TEST-A-0001').relayStates().find((r) => r.relay === 1)?.open).toBe(true);
    await live.waitFor((m) => m.type === 'command' && m.commandId === res.body.commandId && m.state === 'acked');
    const stop = await api('technician').post(`/api/zones/${w.f.zoneA}/stop`);
    expect(stop.status).toBe(202);
    await live.waitFor((m) => m.type === 'valve' && m.zoneId === w.f.zoneA && m.open === false);
    const events = await w.tdb.db.execute(sql`select open, source from valve_events where zone_id = ${w.f.zoneA} order by id`);
    expect(events.rows).toEqual([{ open: true, source: 'command' }, { open: false, source: 'command' }]);
    live.close();
  });

  it('keeps a zone open when a relay state the board sent before opening it arrives after the acknowledgement', async () => {
    const live = await liveClient(w.rt.url, cookies.manager);
    await live.waitFor((m) => m.type === 'snapshot');
    const res = await api('manager').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 2 });
    expect(res.status).toBe(202);
    await live.waitFor((m) => m.type === 'command' && m.commandId === res.body.commandId && m.state === 'acked');
    await live.waitFor((m) => m.type === 'valve' && m.zoneId === w.f.zoneA && m.open === true);
    // the board acknowledged, then reported the open: a state numbered well before both was sent before it opened
    const opened = Number((await w.tdb.db.execute(sql`select max(seq) as seq from valve_events where zone_id = ${w.f.zoneA} and open`)).rows[0].seq);
    const board = w.rt.services.fleet.getById(w.f.controllerA)!;
    const closed = { open: false, since: null, closesAt: null, cmdId: null };
    // the ack skips the queue of valve facts, so an older state can still be on its way
    w.rt.services.dispatcher.relayState(board, { v: 1, seq: opened - 10, at: new Date().toISOString(), relays: Array.from({ length: board.relayCount }, () => closed) });
    const zone = () => w.rt.services.dispatcher.siteActivity(w.f.siteA).active.find((a) => a.zoneId === w.f.zoneA);
    expect(zone()?.state).toBe('open');
    expect(sim.board('TEST-A-0001').relayStates().find((r) => r.relay === 1)?.open).toBe(true);
    expect((await api('manager').post(`/api/zones/${w.f.zoneA}/stop`)).status).toBe(202);
    await live.waitFor((m) => m.type === 'valve' && m.zoneId === w.f.zoneA && m.open === false);
    await until(() => !zone(), 5000);
    live.close();
  });

  it('records a manual start as a run of its own with a zone run, for the history', async () => {
    const r = await until(async () => (await w.tdb.db.execute(sql`select r.kind, zr.state, zr.actual_minutes, zr.estimated_litres from zone_runs zr join runs r on r.id = zr.run_id where zr.zone_id = ${w.f.zoneA} and r.kind = 'manual' and zr.state <> 'running' order by zr.id limit 1`)).rows[0]);
    expect(r.kind).toBe('manual');
    expect(r.state).toBe('stopped');
    // fixture zone A1: 6 heads × 5 L/min
    expect(Number(r.estimated_litres)).toBeCloseTo(30 * Number(r.actual_minutes), 0);
  });

  it('writes each command to the audit log with who and the outcome', async () => {
    const r = await w.tdb.db.execute(sql`select action, outcome, actor_label from audit_log where action like 'valve.%' order by id`);
    expect(r.rows).toEqual(expect.arrayContaining([
      expect.objectContaining({ action: 'valve.start', outcome: 'sent', actor_label: w.f.users.technician.email }),
      expect.objectContaining({ action: 'valve.open', outcome: 'acked', actor_label: w.f.users.technician.email }),
      expect.objectContaining({ action: 'valve.stop', outcome: 'requested' }),
    ]));
  });

  it('refuses minutes outside 1…the cap, owners, and an offline controller', async () => {
    expect((await api('manager').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 0 })).status).toBe(400);
    expect((await api('manager').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 61 })).status).toBe(400);
    expect((await api('manager').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 'ten' })).status).toBe(400);
    expect((await api('owner').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 5 })).status).toBe(403);
    expect((await api('technician').post(`/api/zones/${w.f.zoneB}/start`, { minutes: 5 })).status).toBe(404);
    await sim.board('TEST-B-0001').setFault({ fault: 'offline', on: true });
    await until(() => w.rt.services.fleet.get('TEST-B-0001')?.online === false);
    const res = await api('manager').post(`/api/zones/${w.f.zoneB}/start`, { minutes: 5 });
    expect(res.status).toBe(409);
    expect(res.body.error.code).toBe('controller_offline');
    expect(res.body.error.message).toMatch(/offline/);
    await sim.board('TEST-B-0001').setFault({ fault: 'offline', on: false });
    await until(() => w.rt.services.fleet.get('TEST-B-0001')?.online === true, 8000);
  });

  it('energises two zones started together at least the stagger apart, measured at the board', async () => {
    const board = sim.board('TEST-A-0001');
    const before = board.energizeLog.length;
    const z2 = await zoneIdOnA(2);
    const [a, b] = await Promise.all([
      api('manager').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 1 }),
      api('manager').post(`/api/zones/${z2}/start`, { minutes: 1 }),
    ]);
    expect([a.status, b.status]).toEqual([202, 202]);
    await until(() => board.energizeLog.length >= before + 2);
    const [e1, e2] = board.energizeLog.slice(before);
    const stagger = w.rt.services.fleet.get('TEST-A-0001')!.staggerMs;
    expect(Math.abs(e2.atMs - e1.atMs)).toBeGreaterThanOrEqual(stagger);
    await api('manager').post(`/api/sites/${w.f.siteA}/stop`);
    await until(() => board.relayStates().every((r) => !r.open));
  });

  it('queues a start beyond the controller’s valve cap and tells the user', async () => {
    // fixture controller A allows 2 valves at once
    const z2 = await zoneIdOnA(2);
    const z3 = await zoneIdOnA(3);
    const live = await liveClient(w.rt.url, cookies.manager);
    await api('manager').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 1 });
    await api('manager').post(`/api/zones/${z2}/start`, { minutes: 1 });
    const third = await api('manager').post(`/api/zones/${z3}/start`, { minutes: 1 });
    expect(third.status).toBe(202);
    expect(third.body.state).toBe('queued');
    expect(third.body.message).toMatch(/valves open/);
    await until(() => sim.board('TEST-A-0001').relayStates().filter((r) => r.open).length === 2);
    const act = await api('manager').get(`/api/sites/${w.f.siteA}/activity`);
    expect(act.body.queue.map((q: { zoneId: number }) => q.zoneId)).toEqual([z3]);
    // closing one admits the queued zone
    await api('manager').post(`/api/zones/${w.f.zoneA}/stop`);
    await live.waitFor((m) => m.type === 'valve' && m.zoneId === z3 && m.open === true, 5000);
    expect(sim.board('TEST-A-0001').relayStates().filter((r) => r.open).length).toBeLessThanOrEqual(2);
    await api('manager').post(`/api/sites/${w.f.siteA}/stop`);
    await until(() => sim.board('TEST-A-0001').relayStates().every((r) => !r.open));
    live.close();
  });

  it('retries a command the board does not acknowledge, then reports it failed to the user who sent it', async () => {
    const board = sim.board('TEST-A-0001');
    board.setFault({ fault: 'no_ack', on: true });
    const live = await liveClient(w.rt.url, cookies.technician);
    const res = await api('technician').post(`/api/zones/${w.f.zoneA}/start`, { minutes: 1 });
    expect(res.status).toBe(202);
    const failed = await live.waitFor((m) => m.type === 'command' && m.commandId === res.body.commandId && m.state === 'failed', 6000);
    expect(String(failed.message)).toMatch(/no acknowledgement/);
    const row = await w.tdb.db.execute(sql`select state, attempts from commands where id = ${res.body.commandId}`);
    expect(row.rows[0]).toEqual({ state: 'failed', attempts: 2 });
    board.setFault({ fault: 'no_ack', on: false });
    live.close();
  });
});

describe('who sees what', () => {
  it('never sends an owner the events of a site they are not a member of', async () => {
    const owner = await liveClient(w.rt.url, cookies.owner);
    const manager = await liveClient(w.rt.url, cookies.manager);
    const snap = await owner.waitFor((m) => m.type === 'snapshot');
    expect((snap.sites as { id: number }[]).map((s) => s.id)).toEqual([w.f.siteA]);
    await api('manager').post(`/api/zones/${w.f.zoneB}/start`, { minutes: 1 });
    await manager.waitFor((m) => m.type === 'valve' && m.siteId === w.f.siteB && m.open === true);
    await manager.waitFor((m) => m.type === 'reading' && m.siteId === w.f.siteB);
    await api('manager').post(`/api/sites/${w.f.siteB}/stop`);
    await manager.waitFor((m) => m.type === 'valve' && m.siteId === w.f.siteB && m.open === false);
    expect(owner.messages.filter((m) => m.siteId === w.f.siteB)).toEqual([]);
    expect(owner.messages.some((m) => m.type === 'reading' && m.siteId === w.f.siteA)).toBe(true);
    owner.close();
    manager.close();
  });

  it('refuses a socket without a session', async () => {
    await expect(liveClient(w.rt.url, 'runnel.sid=forged')).rejects.toThrow(/401/);
  });

  it('answers a malformed live message with an error and keeps the socket open', async () => {
    const c = await liveClient(w.rt.url, cookies.manager);
    c.ws.send('{"type":"open-all-valves"}');
    await c.waitFor((m) => m.type === 'error' && m.code === 'bad_message');
    c.ws.send('{"type":"ping"}');
    await c.waitFor((m) => m.type === 'pong');
    c.close();
  });
});

describe('the board keeps its own authority', () => {
  it('closes a relay by itself at the maximum on-time when the server is gone', async () => {
    // A command sent straight to the board with a 2 s maximum on-time, and no server close.
    const board = sim.board('TEST-B-0001');
    await w.rt.gateway.send('TEST-B-0001', { v: 1, id: 'failsafe-test-0001', op: 'open', relay: 2, maxOnSeconds: 2, at: new Date().toISOString() });
    await until(() => board.relayStates().find((r) => r.relay === 2)?.open === true);
    const t0 = Date.now();
    await until(() => board.relayStates().find((r) => r.relay === 2)?.open === false, 5000);
    expect(Date.now() - t0).toBeLessThan(3000);
    const ev = await until(async () => (await w.tdb.db.execute(sql`select source from valve_events where controller_id = ${w.f.controllerB} and relay = 2 and open = false`)).rows[0]);
    expect(ev.source).toBe('failsafe');
  });
});

describe('offline buffering', () => {
  it('stores every reading a board sent once, after an outage and replay, without duplicates or loss', async () => {
    const board = sim.board('TEST-A-0001');
    await board.setFault({ fault: 'offline', on: true });
    await new Promise((r) => setTimeout(r, 1500)); // samples pile up in the board's buffer
    expect(board.stats.samplesBuffered).toBeGreaterThan(0);
    await board.setFault({ fault: 'offline', on: false });
    await until(() => board.stats.samplesBuffered === 0, 10_000);
    // Power the board off so its counts are final, then compare what it sent with what is stored.
    await board.stop();
    await w.rt.writer.flush();
    const sent = board.stats.samplesSent;
    const stored = (await w.tdb.db.execute(sql`select count(*)::int as n from readings where controller_id = ${w.f.controllerA}`)).rows[0].n as number;
    expect(sent).toBeGreaterThan(0);
    expect(stored).toBe(sent);
    const dups = await w.tdb.db.execute(sql`select count(*)::int as n from (select board_at from readings where controller_id = ${w.f.controllerA} group by board_at having count(*) > 1) d`);
    expect(dups.rows[0].n).toBe(0);
  });
});
