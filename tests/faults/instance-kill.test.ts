import { spawn, type ChildProcess } from 'node:child_process';
import { afterAll, beforeAll, describe, expect, it, onTestFailed } from 'vitest';
import { sql } from 'drizzle-orm';
import { zones } from '../../server/db/schema/index';
import { SCHEDULER_LOCK_KEY } from '../../server/scheduler/scheduler';
import { startRuntime, type Runtime } from '../../server/runtime';
import { SERVER_MQTT_USER } from '../../server/broker/mosquitto';
import { projectRoot } from '../../server/paths';
import { provisionBoards, type BoardSpecRow } from '../../server/services/device-secrets';
import { startSimulator, type Simulator } from '../../simulator/fleet';
import { testConfig } from '../helpers/config';
import { createTestDb, type TestDb } from '../helpers/db';
import { seedFixture, type Fixture } from '../helpers/fixtures';
import { until } from '../helpers/live';
import { expectOneFinishedRun, nextMinuteProgram } from '../helpers/takeover';
import { startMosquitto, type Mosquitto } from '../helpers/mosquitto';
import { freePort } from '../helpers/ports';

// The same takeover as tests/faults/instances.test.ts, but the dispatching instance is a server
// process of its own (server/index.ts from source under tsx, as `npm run dev:server` runs it) and
// dies by SIGKILL: nothing of it runs on the way out. Its PostgreSQL session ends with the process,
// so PostgreSQL itself frees the scheduler's advisory lock.

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

let tdb: TestDb;
let f: Fixture;
let boards: BoardSpecRow[];
let broker: Mosquitto;
let child: ChildProcess | undefined;
let childExit: Promise<{ code: number | null; signal: NodeJS.Signals | null }>;
let b: Runtime;
let sim: Simulator;

/** What the child wrote (the tail), shown only when something fails. */
let childOutput = '';
const keepOutput = (d: Buffer) => {
  childOutput = (childOutput + d.toString()).slice(-64_000);
};
const childAlive = () => !!child && child.exitCode === null && child.signalCode === null;
const killChild = () => {
  if (childAlive()) child!.kill('SIGKILL');
};


/** The settings of both instances (those of instances.test.ts), as environment variables. */
const instanceEnv = (): Record<string, string> => ({
  NODE_ENV: 'test', DATABASE_URL: tdb.url, HOST: '127.0.0.1', PORT: '0', LOG_LEVEL: 'warn', LOGIN_RATE_LIMIT: '1000',
  RUNNEL_DEMO: '0', SIMULATOR: '0', MQTT_PORT: '0', SIM_PORT: '0', WEATHER_PORT: '0', FAKE_SMTP_PORT: '0',
  MQTT_URL: broker.serverUrl, MQTT_USERNAME: SERVER_MQTT_USER, MQTT_PASSWORD: broker.serverPassword, LIVE_RELAY: '1', MQTT_INGEST_CONNECTIONS: '8',
  SCHEDULER: '1', SCHEDULER_TICK_MS: '500', RECONCILE_DELAY_MS: '1500', READING_FLUSH_MS: '50', RECEIPT_INTERVAL_MS: '300', FAILSAFE_MARGIN_SECONDS: '3', ACK_TIMEOUT_MS: '1500',
});

/** Sessions of this test database holding the scheduler's advisory lock (a bigint key is classid:objid, objsubid 1: PostgreSQL docs, "pg_locks"). */
async function schedulerLockHolders(): Promise<number> {
  const r = await tdb.db.execute(sql`
    select count(*) as n from pg_locks
    where locktype = 'advisory' and granted and objsubid = 1
      and database = (select oid from pg_database where datname = current_database())
      and ((classid::bigint << 32) | objid::bigint) = ${SCHEDULER_LOCK_KEY}::bigint`);
  return Number(r.rows[0].n);
}

async function waitHealthy(url: string, ms: number) {
  const end = Date.now() + ms;
  while (Date.now() < end) {
    if (!childAlive()) throw new Error(`the server process exited before it was healthy:\n${childOutput}`);
    try {
      if ((await fetch(`${url}/api/health`)).status === 200) return;
    } catch {
      /* not listening yet */
    }
    await sleep(200);
  }
  throw new Error(`the server process did not answer /api/health in ${ms} ms:\n${childOutput}`);
}

// a worker that ends without afterAll (a crash, a hard stop) still takes the child with it
process.once('exit', killChild);

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  await tdb.db.insert(zones).values({ controllerId: f.controllerA, relay: 2, name: 'A2', plantType: 'shrubs', soilTexture: 'loam', headType: 'drip', headCount: 50, flowPerHeadLpm: 0.1, areaM2: 20, rootDepthM: 0.4, efficiency: 0.9 });
  boards = await provisionBoards(tdb.db);
  broker = await startMosquitto(boards);
  // instance A: its own OS process, started from source the way `npm run dev:server` does
  const port = await freePort();
  child = spawn(process.execPath, ['--import', 'tsx', 'server/index.ts'], {
    cwd: projectRoot,
    stdio: ['ignore', 'pipe', 'pipe'],
    env: { PATH: process.env.PATH ?? '', HOME: process.env.HOME ?? '', ...instanceEnv(), PORT: String(port) },
  });
  child.stdout!.on('data', keepOutput);
  child.stderr!.on('data', keepOutput);
  const started = child;
  childExit = new Promise((r) => started.once('exit', (code, signal) => r({ code, signal })));
  await waitHealthy(`http://127.0.0.1:${port}`, 60_000);
  // A takes the scheduler lock at its first tick; only then does B start
  await until(async () => (await schedulerLockHolders()) === 1, 15_000, 100).catch(() => {
    throw new Error(`the server process did not take the scheduler lock:\n${childOutput}`);
  });
  b = await startRuntime(testConfig(tdb.url, instanceEnv()));
  // boards back off 1.5 s before reconnecting; a board sends again what no receipt has named after 2 s
  sim = await startSimulator({ brokerUrl: broker.url, boards, seed: 43, sampleIntervalMs: 50, samplesPerMessage: 2, reconnectPeriodMs: 1500, resendAfterMs: 2000 });
  await sim.ready();
  await until(() => b.services.fleet.all().every((x) => x.online), 10_000);
}, 120_000);

afterAll(async () => {
  await sim?.close().catch(() => {});
  await b?.close().catch(() => {});
  if (childAlive()) {
    killChild();
    await childExit;
  }
  process.off('exit', killChild);
  await broker?.stop();
  await tdb?.drop();
});

describe('the dispatching instance is a process of its own and is SIGKILLed mid-run', () => {
  it('lets the other instance take the lock and finish the run, with no valve open past its failsafe time and no zone run doubled or lost', async () => {
    onTestFailed(() => {
      process.stderr.write(`--- output of the killed server process (tail) ---\n${childOutput}\n---\n`);
    });
    // the child holds the lock, so the instance in this process is not the leader
    await sleep(1500);
    expect(childAlive()).toBe(true);
    expect(await schedulerLockHolders()).toBe(1);
    expect(b.services.scheduler.isLeader).toBe(false);

    const { programId, zoneA2 } = await nextMinuteProgram(tdb.db, f, 'Killed dispatcher');
    const board = sim.board('TEST-A-0001');
    await until(() => board.relayStates()[0].open, 90_000, 100);
    const closesAt = Date.parse(board.relayStates()[0].closesAt!);
    // the child opened it: B never held the lock
    expect(b.services.scheduler.isLeader).toBe(false);

    // the dispatching process dies at once: no close, no shutdown handler, no goodbye to the broker
    expect(childAlive()).toBe(true);
    child!.kill('SIGKILL');
    expect(await childExit).toEqual({ code: null, signal: 'SIGKILL' });

    // PostgreSQL ended the dead process's session and freed its lock: B takes it
    await until(() => b.services.scheduler.isLeader, 15_000, 100);
    expect(await schedulerLockHolders()).toBe(1);
    // no valve stays open past its maximum on-time
    await until(() => !board.relayStates()[0].open, Math.max(0, closesAt - Date.now()) + 5000, 100);
    expect(Date.now()).toBeLessThan(closesAt + 3000);

    // the run goes on: the second zone runs under the new dispatcher, then everything is closed
    await expectOneFinishedRun(tdb.db, f, programId, zoneA2, until);

    // every relay of the board is closed, at the board and in what the surviving instance knows of it
    expect(board.relayStates().every((r) => !r.open)).toBe(true);
    const seen = () => b.services.fleet.get('TEST-A-0001')!.relays.map((r) => r.open);
    await until(() => seen().every((open) => !open), 10_000, 100).catch(() => {});
    expect(seen()).toEqual(board.relayStates().map(() => false));
  }, 240_000);
});
