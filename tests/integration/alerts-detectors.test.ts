import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { pino } from 'pino';
import { sql } from 'drizzle-orm';
import { VirtualClock } from '../../server/clock';
import { Fleet, type BoardLive } from '../../server/fleet/fleet';
import { LiveBus } from '../../server/live/bus';
import { AlertEngine, type AlertSettings } from '../../server/alerts/engine';
import { AlertStore } from '../../server/alerts/store';
import type { ValveDispatcher } from '../../server/services/dispatcher';
import { controllers } from '../../server/db/schema/index';
import { createTestDb, type TestDb } from '../helpers/db';
import { seedFixture, type Fixture } from '../helpers/fixtures';

/**
 * The alert engine on virtual time, fed readings by hand: the conditions the simulator cannot
 * produce (flow with every valve closed, a master valve), and the timing rules.
 */
let tdb: TestDb;
let f: Fixture;
let clock: VirtualClock;
let bus: LiveBus;
let fleet: Fleet;
let engine: AlertEngine;
let board: BoardLive;
const active: { zoneId: number; controllerId: number; relay: number; state: 'opening' | 'open' | 'closing'; plannedEnd: number | null }[] = [];
const dispatcher = { siteActivity: () => ({ active, queue: [] }) } as unknown as ValveDispatcher;
const settings: AlertSettings = {
  tickMs: 3_600_000, offlineMs: 600_000, stuckMs: 60_000, highRatio: 1.5, lowRatio: 0.5, leakLpm: 1, flowMs: 60_000, settleMs: 30_000, lowVoltageV: 21.5, voltageMs: 120_000,
};

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  await tdb.db.update(controllers).set({ masterValveRelay: 6 }).where(sql`id = ${f.controllerB}`);
  clock = new VirtualClock(Date.parse('2025-07-01T06:00:00Z'));
  bus = new LiveBus();
  fleet = new Fleet(tdb.db);
  await fleet.load();
  for (const b of fleet.all()) {
    b.online = true;
    b.lastSeenAt = clock.now();
  }
  board = fleet.getById(f.controllerA)!;
  engine = new AlertEngine({ db: tdb.db, bus, fleet, dispatcher, clock, log: pino({ level: 'silent' }), store: new AlertStore({ db: tdb.db, bus, clock }), settings });
  await engine.start();
});
afterAll(async () => {
  await engine.stop();
  await tdb.drop();
});
beforeEach(() => {
  active.splice(0);
  for (const b of fleet.all()) for (const r of b.relays) r.open = false;
});

const reading = async (b: BoardLive, flowLpm: number | null, supplyV = 24.8) => {
  bus.publish({ type: 'reading', siteId: b.siteId, controllerId: b.controllerId, at: new Date(clock.now()).toISOString(), rain: false, moisturePct: 30, supplyV, flowLpm, rssi: -60 });
  await engine.idle();
};
/** Move time on in steps, a reading at each step. */
const readingsFor = async (b: BoardLive, ms: number, flowLpm: number | null, supplyV?: number) => {
  for (let t = 0; t < ms; t += 10_000) {
    clock.advance(10_000);
    await engine.checkNow();
    await reading(b, flowLpm, supplyV);
  }
};
const valve = async (b: BoardLive, relay: number, open: boolean) => {
  b.relays[relay - 1].open = open;
  bus.publish({ type: 'valve', siteId: b.siteId, controllerId: b.controllerId, zoneId: b.zoneByRelay.get(relay) ?? null, relay, open, at: new Date(clock.now()).toISOString(), source: 'command', since: null, plannedEnd: null });
  await engine.idle();
};
const rows = async (kind: string) =>
  (await tdb.db.execute<{ state: string; episode_key: string }>(sql`select state::text as state, episode_key from alerts where kind = ${kind} order by id`)).rows;

describe('flow with every valve closed', () => {
  it('is raised after it has lasted the flow window, once, and resolved after normal readings for as long', async () => {
    await readingsFor(board, 50_000, 4);
    expect(await rows('flow_while_closed')).toEqual([]);
    await readingsFor(board, 30_000, 4);
    expect(await rows('flow_while_closed')).toEqual([{ state: 'open', episode_key: `flow_while_closed:controller:${f.controllerA}` }]);
    await readingsFor(board, 120_000, 4);
    expect((await rows('flow_while_closed')).length).toBe(1);
    await readingsFor(board, 50_000, 0.05);
    expect((await rows('flow_while_closed'))[0].state).toBe('open');
    await readingsFor(board, 20_000, 0.05);
    expect((await rows('flow_while_closed'))[0].state).toBe('resolved');
  });

  it('needs the flow to last without a break', async () => {
    await readingsFor(board, 40_000, 4);
    await readingsFor(board, 10_000, 0);
    await readingsFor(board, 40_000, 4);
    expect((await rows('flow_while_closed')).length).toBe(1); // still only the first episode
  });
});

describe('flow against the open zone', () => {
  it('ignores the readings just after a valve changes, while the pipes fill', async () => {
    active.push({ zoneId: f.zoneA, controllerId: f.controllerA, relay: 1, state: 'open', plannedEnd: null });
    await valve(board, 1, true);
    // 30 s of settling: even 3 × the nominal flow does not count yet.
    await readingsFor(board, 20_000, 90);
    await readingsFor(board, 60_000, 90);
    expect(await rows('high_flow')).toEqual([]);
    await readingsFor(board, 20_000, 90);
    expect(await rows('high_flow')).toEqual([{ state: 'open', episode_key: `high_flow:zone:${f.zoneA}` }]);
    // the zone closes: nothing can be judged, the alert stays until a later run shows normal flow
    await valve(board, 1, false);
    await readingsFor(board, 200_000, 0);
    expect((await rows('high_flow'))[0].state).toBe('open');
    await valve(board, 1, true);
    await readingsFor(board, 100_000, 30);
    expect((await rows('high_flow'))[0].state).toBe('resolved');
  });

  it('does not judge flow while the master valve is closed', async () => {
    const b = fleet.getById(f.controllerB)!;
    active.push({ zoneId: f.zoneB, controllerId: f.controllerB, relay: 1, state: 'open', plannedEnd: null });
    await valve(b, 1, true);
    await readingsFor(b, 200_000, 1);
    expect((await rows('low_flow')).filter((r) => r.episode_key.endsWith(`zone:${f.zoneB}`))).toEqual([]);
    await valve(b, 6, true);
    await readingsFor(b, 100_000, 1);
    expect((await rows('low_flow')).filter((r) => r.episode_key.endsWith(`zone:${f.zoneB}`))).toEqual([{ state: 'open', episode_key: `low_flow:zone:${f.zoneB}` }]);
  });
});

describe('low supply voltage', () => {
  it('is raised below the threshold and resolved only half a volt above it', async () => {
    const b = fleet.getById(f.controllerB)!;
    await readingsFor(b, 130_000, null, 21.2);
    expect((await rows('low_voltage')).map((r) => r.state)).toEqual(['open']);
    await readingsFor(b, 200_000, null, 21.8);
    expect((await rows('low_voltage')).map((r) => r.state)).toEqual(['open']);
    await readingsFor(b, 130_000, null, 22.3);
    expect((await rows('low_voltage')).map((r) => r.state)).toEqual(['resolved']);
  });
});

describe('a valve open when it should be closed', () => {
  it('allows a run to its planned end, and is raised once the valve stays open past it', async () => {
    active.push({ zoneId: f.zoneA, controllerId: f.controllerA, relay: 1, state: 'open', plannedEnd: clock.now() + 120_000 });
    await valve(board, 1, true);
    await readingsFor(board, 150_000, 30);
    expect(await rows('valve_stuck_open')).toEqual([]);
    await readingsFor(board, 40_000, 30);
    expect(await rows('valve_stuck_open')).toEqual([{ state: 'open', episode_key: `valve_stuck_open:controller:${f.controllerA}:relay:1` }]);
    await valve(board, 1, false);
    expect((await rows('valve_stuck_open'))[0].state).toBe('resolved');
  });

  it('is raised for a relay opened without the server asking', async () => {
    const b = fleet.getById(f.controllerB)!;
    await valve(b, 3, true);
    await readingsFor(b, 70_000, null);
    expect((await rows('valve_stuck_open')).filter((r) => r.episode_key.endsWith('relay:3'))).toEqual([{ state: 'open', episode_key: `valve_stuck_open:controller:${f.controllerB}:relay:3` }]);
  });
});
