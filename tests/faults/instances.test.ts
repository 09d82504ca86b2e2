import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { sql } from 'drizzle-orm';
import { zones } from '../../server/db/schema/index';
import { startRuntime, type Runtime } from '../../server/runtime';
import { SERVER_MQTT_USER } from '../../server/broker/mosquitto';
import { provisionBoards, type BoardSpecRow } from '../../server/services/device-secrets';
import { startSimulator, type Simulator } from '../../simulator/fleet';
import { testConfig } from '../helpers/config';
import { createTestDb, type TestDb } from '../helpers/db';
import { seedFixture, type Fixture } from '../helpers/fixtures';
import { liveClient, sessionCookie, until } from '../helpers/live';
import { expectOneFinishedRun, nextMinuteProgram } from '../helpers/takeover';
import { startMosquitto, type Mosquitto } from '../helpers/mosquitto';

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

let tdb: TestDb;
let f: Fixture;
let boards: BoardSpecRow[];
let broker: Mosquitto;
let a: Runtime;
let b: Runtime;
let sim: Simulator;

const instanceConfig = () =>
  testConfig(tdb.url, {
    MQTT_URL: broker.serverUrl, MQTT_USERNAME: SERVER_MQTT_USER, MQTT_PASSWORD: broker.serverPassword, LIVE_RELAY: '1', MQTT_INGEST_CONNECTIONS: '8',
    SCHEDULER: '1', SCHEDULER_TICK_MS: '500', RECONCILE_DELAY_MS: '1500', READING_FLUSH_MS: '50', RECEIPT_INTERVAL_MS: '300', FAILSAFE_MARGIN_SECONDS: '3', ACK_TIMEOUT_MS: '1500',
  });

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  await tdb.db.insert(zones).values({ controllerId: f.controllerA, relay: 2, name: 'A2', plantType: 'shrubs', soilTexture: 'loam', headType: 'drip', headCount: 50, flowPerHeadLpm: 0.1, areaM2: 20, rootDepthM: 0.4, efficiency: 0.9 });
  boards = await provisionBoards(tdb.db);
  broker = await startMosquitto(boards);
  a = await startRuntime(instanceConfig());
  await sleep(300); // a takes the scheduler lock first
  b = await startRuntime(instanceConfig());
  // boards back off 1.5 s before reconnecting (field boards back off for seconds); the instances retry every 250 ms
  // a board sends again what no receipt has named after 2 s (30 s in the field)
  sim = await startSimulator({ brokerUrl: broker.url, boards, seed: 41, sampleIntervalMs: 50, samplesPerMessage: 2, reconnectPeriodMs: 1500, resendAfterMs: 2000 });
  await sim.ready();
  await until(() => a.services.fleet.all().every((x) => x.online) || b.services.fleet.all().every((x) => x.online), 10_000);
}, 60_000);
afterAll(async () => {
  await sim?.close().catch(() => {});
  await a?.close().catch(() => {});
  await b?.close().catch(() => {});
  await broker?.stop();
  await tdb?.drop();
});

describe('two instances on one PostgreSQL and one Mosquitto broker', () => {
  it('refuses a board with the wrong secret at the broker itself', async () => {
    const mqtt = (await import('mqtt')).default;
    await expect(mqtt.connectAsync(broker.url, { clientId: 'TEST-A-0001', username: 'TEST-A-0001', password: 'wrong', reconnectPeriod: 0 })).rejects.toThrow();
  });

  it('shows a browser on one instance the valve events the other ingested', async () => {
    const cookie = await sessionCookie(b.url, f.users.manager.email);
    const live = await liveClient(b.url, cookie);
    await live.waitFor((m) => m.type === 'snapshot');
    sim.board('TEST-A-0001').pressButton(2, true);
    const ev = await live.waitFor((m) => m.type === 'valve' && m.controllerId === f.controllerA && m.relay === 2 && m.open === true, 5000);
    expect(ev.source).toBe('button');
    sim.board('TEST-A-0001').pressButton(2, false);
    await live.waitFor((m) => m.type === 'valve' && m.relay === 2 && m.open === false, 5000);
    live.close();
  });

  it('dispatches each scheduled start once, and when the dispatching instance stops mid-run the other takes over with no valve left open and no zone run doubled or lost', async () => {
    const leader = a.services.scheduler.isLeader ? a : b;
    const other = leader === a ? b : a;
    expect(other.services.scheduler.isLeader).toBe(false);
    const { programId, zoneA2 } = await nextMinuteProgram(tdb.db, f, 'Takeover');
    const board = sim.board('TEST-A-0001');
    await until(() => board.relayStates()[0].open, 90_000, 100);
    const closesAt = Date.parse(board.relayStates()[0].closesAt!);
    // the dispatching instance stops (cleanly, in this process; instance-kill.test.ts SIGKILLs one): it closes no valve on its way out
    await leader.close();
    await until(() => other.services.scheduler.isLeader, 15_000, 100);
    // no valve stays open past its maximum on-time
    await until(() => !board.relayStates()[0].open, Math.max(0, closesAt - Date.now()) + 5000, 100);
    expect(Date.now()).toBeLessThan(closesAt + 3000);
    // the run goes on: the second zone runs under the new dispatcher, then everything is closed
    await expectOneFinishedRun(tdb.db, f, programId, zoneA2, until);
    expect(board.relayStates().every((r) => !r.open)).toBe(true);
  }, 240_000);

  it('stores each reading once across the two instances’ shared subscription, also when the broker restarts during ingest', async () => {
    await sleep(1500);
    // Mosquitto forgets shared subscriptions across its own restart: what a board publishes before
    // the instances have subscribed again is taken and delivered to no one. The board sends it
    // again when no receipt names it, and the database stores it once.
    const reconnectsBefore = [...sim.boards.values()].reduce((n, x) => n + x.stats.reconnects, 0);
    await broker.restart();
    await sleep(2500);
    await broker.restart();
    await sleep(1500);
    // every message from before and during the restarts has its receipt (the newest are on their way)
    await until(() => [...sim.boards.values()].every((x) => x.online && x.stats.samplesBuffered === 0 && x.stats.unconfirmedAgeMs < 1000), 30_000);
    const reconnects = [...sim.boards.values()].reduce((n, x) => n + x.stats.reconnects, 0) - reconnectsBefore;
    expect(reconnects).toBeGreaterThanOrEqual(2 * sim.boards.size);
    await sim.close();
    const sent = [...sim.boards.values()].reduce((s, x) => s + x.stats.samplesSent, 0);
    // the last messages the broker took before the boards went are still on their way: wait for
    // them (a count that stops short of `sent` fails the check below), then make sure nothing more comes
    const count = async () => Number((await tdb.db.execute(sql`select count(*) as n from readings`)).rows[0].n);
    await until(async () => (await count()) >= sent, 15_000, 250).catch(() => {});
    await sleep(1000);
    for (const rt of [a, b]) await rt.writer.flush().catch(() => {});
    const stored = await count();
    const dups = Number((await tdb.db.execute(sql`select count(*) as n from (select 1 from readings group by controller_id, board_at, seq having count(*) > 1) d`)).rows[0].n);
    expect(sent).toBeGreaterThan(100);
    expect(dups).toBe(0);
    expect(stored).toBe(sent);
    // each instance merged the hourly sums of only the rows it inserted: every reading counted once
    const hourly = await tdb.db.execute<{ n: string; m: number }>(sql`select coalesce(sum(n), 0) as n, coalesce(sum(moisture_sum), 0) as m from readings_hourly`);
    const raw = await tdb.db.execute<{ m: number }>(sql`select coalesce(sum(moisture_pct::float8), 0) as m from readings`);
    expect(Number(hourly.rows[0].n)).toBe(stored);
    expect(hourly.rows[0].m).toBeCloseTo(raw.rows[0].m, 3);
  }, 60_000);
});
