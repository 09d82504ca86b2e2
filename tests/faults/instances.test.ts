import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { zones } from '../../server/db/schema/index';
import { startRuntime, type Runtime } from '../../server/runtime';
import { SERVER_MQTT_USER } from '../../server/broker/mosquitto';
import { provisionBoards, type BoardSpecRow } from '../../server/services/device-secrets';
import { startSimulator, type Simulator } from '../../simulator/fleet';
import { testConfig } from '../helpers/config';
import { createTestDb, type TestDb } from '../helpers/db';
import { seedFixture, type Fixture } from '../helpers/fixtures';
import { liveClient, sessionCookie, until } from '../helpers/live';
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
    MQTT_URL: broker.url, MQTT_USERNAME: SERVER_MQTT_USER, MQTT_PASSWORD: broker.serverPassword, LIVE_RELAY: '1',
    SCHEDULER: '1', SCHEDULER_TICK_MS: '500', RECONCILE_DELAY_MS: '1500', READING_FLUSH_MS: '50', FAILSAFE_MARGIN_SECONDS: '3', ACK_TIMEOUT_MS: '1500',
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
  sim = await startSimulator({ brokerUrl: broker.url, boards, seed: 41, sampleIntervalMs: 50, samplesPerMessage: 2, reconnectPeriodMs: 300 });
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

});
