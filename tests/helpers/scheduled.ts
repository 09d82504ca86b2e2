import { VirtualClock } from '../../server/clock';
import { startRuntime, type Runtime } from '../../server/runtime';
import { provisionBoards, type BoardSpecRow } from '../../server/services/device-secrets';
import { startSimulator, type Simulator } from '../../simulator/fleet';
import { createTestDb, type TestDb } from './db';
import { testConfig } from './config';
import { seedFixture, type Fixture } from './fixtures';

export type ScheduledWorld = {
  clock: VirtualClock;
  tdb: TestDb;
  f: Fixture;
  boards: BoardSpecRow[];
  rt: Runtime;
  sim: Simulator;
  /** Move virtual time forward to `targetMs`, timer by timer, letting real I/O settle in between. */
  runUntil: (targetMs: number, maxStepMs?: number) => Promise<void>;
  runFor: (ms: number, maxStepMs?: number) => Promise<void>;
  restartServer: (opts?: { graceful?: boolean }) => Promise<void>;
  close: () => Promise<void>;
};

export const schedulerSettings = {
  SCHEDULER_TICK_MS: '300000',
  RECONCILE_DELAY_MS: '2000',
  OFFLINE_AFTER_SECONDS: '3600',
  ACK_TIMEOUT_MS: '4000',
  COMMAND_RETRIES: '1',
  FAILSAFE_MARGIN_SECONDS: '30',
  READING_FLUSH_MS: '20',
};

const realSleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

/** The whole server and a simulated fleet on one virtual clock, over the fixture world. */
export async function startScheduledWorld(startMs: number, prepare?: (tdb: TestDb, f: Fixture) => Promise<void>, extra: Record<string, string> = {}): Promise<ScheduledWorld> {
  const clock = new VirtualClock(startMs);
  const tdb = await createTestDb();
  const f = await seedFixture(tdb.db);
  if (prepare) await prepare(tdb, f);
  const boards = await provisionBoards(tdb.db);
  const config = () => testConfig(tdb.url, { ...schedulerSettings, ...extra });
  let rt = await startRuntime(config(), { clock });
  const sim = await startSimulator({ brokerUrl: rt.mqttUrl!, boards, clock, seed: 3, sampleIntervalMs: 600_000, samplesPerMessage: 1, reconnectPeriodMs: 200 });
  await sim.ready();
  const settle = async () => {
    // real time for MQTT and PostgreSQL round trips; longer while commands await acknowledgements
    // quiet = no command awaiting its acknowledgement and no query running, twice in a row
    let calm = 0;
    for (let i = 0; i < 400 && calm < 2; i++) {
      await realSleep(3);
      const pool = w.rt.dbh.pool;
      const idle = w.rt.services.dispatcher.inFlight === 0 && pool.waitingCount === 0 && pool.idleCount === pool.totalCount;
      calm = idle ? calm + 1 : 0;
    }
  };
  const w: ScheduledWorld = {
    clock, tdb, f, boards, rt, sim,
    runUntil: async (targetMs, maxStepMs = 60_000) => {
      while (clock.now() < targetMs) {
        await settle();
        const next = clock.nextDue();
        const step = Math.min(targetMs - clock.now(), maxStepMs, next !== null ? Math.max(next - clock.now(), 0) : Infinity);
        clock.advance(step);
      }
      await settle();
    },
    runFor: (ms, maxStepMs) => w.runUntil(clock.now() + ms, maxStepMs),
    restartServer: async () => {
      const port = Number(new URL(w.rt.mqttUrl!).port);
      await w.rt.close();
      rt = await startRuntime({ ...config(), MQTT_PORT: port }, { clock });
      w.rt = rt;
    },
    close: async () => {
      await sim.close();
      await w.rt.close();
      await tdb.drop();
    },
  };
  // boards report their state on connect; let the server take the lock and see them online
  await w.runFor(3000, 500);
  return w;
}
