import type { Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { SimBoard, type BoardLog } from './board';
import type { Clock } from './clock';
import { createControlApp } from './control-api';
import type { BoardSpec } from './spec';

export type { BoardSpec } from './spec';

export type SimulatorOptions = {
  brokerUrl: string;
  boards: BoardSpec[];
  seed?: number;
  clock?: Clock;
  sampleIntervalMs?: number;
  samplesPerMessage?: number;
  /** See SimBoardOptions.samplesInBursts. */
  samplesInBursts?: boolean;
  /** Control API port: undefined = no HTTP API, 0 = a free port. */
  controlPort?: number;
  controlHost?: '127.0.0.1';
  /** Boards connected at a time (default 50), so a large fleet can start on a small machine. */
  connectBatchSize?: number;
  /** Longest a batch may hold up the next one while its boards connect (default 10 s). */
  connectBatchTimeoutMs?: number;
  bufferLimit?: number;
  /** See SimBoardOptions.resendAfterMs. */
  resendAfterMs?: number;
  reconnectPeriodMs?: number;
  log?: BoardLog;
};

export type Simulator = {
  boards: Map<string, SimBoard>;
  /** The board with this serial; throws for a serial the simulator does not run. */
  board(serial: string): SimBoard;
  controlUrl?: string;
  /** Resolves when every board has connected and subscribed once. */
  ready(): Promise<void>;
  close(): Promise<void>;
};

/** Run a fleet of simulated boards (and, with controlPort, the control API on loopback). */
export async function startSimulator(opts: SimulatorOptions): Promise<Simulator> {
  const boards = new Map<string, SimBoard>();
  for (const spec of opts.boards) {
    if (boards.has(spec.serial)) throw new Error(`Serial ${spec.serial} appears twice in the fleet`);
    boards.set(
      spec.serial,
      new SimBoard(spec, {
        brokerUrl: opts.brokerUrl,
        seed: opts.seed,
        clock: opts.clock,
        sampleIntervalMs: opts.sampleIntervalMs,
        samplesPerMessage: opts.samplesPerMessage,
        samplesInBursts: opts.samplesInBursts,
        bufferLimit: opts.bufferLimit,
        resendAfterMs: opts.resendAfterMs,
        reconnectPeriodMs: opts.reconnectPeriodMs,
        log: opts.log,
      }),
    );
  }
  const board = (serial: string) => {
    const b = boards.get(serial);
    if (!b) throw new Error(`No simulated board ${serial}`);
    return b;
  };

  let closing = false;
  const starts: Promise<void>[] = [];
  const batchSize = Math.max(1, opts.connectBatchSize ?? 50);
  const batchTimeout = opts.connectBatchTimeoutMs ?? 10_000;
  const all = [...boards.values()];
  const launched = (async () => {
    for (let i = 0; i < all.length && !closing; i += batchSize) {
      const batch = all.slice(i, i + batchSize).map((b) => b.start());
      starts.push(...batch);
      await Promise.race([Promise.all(batch), delay(batchTimeout)]);
    }
  })();

  let server: Server | undefined;
  let controlUrl: string | undefined;
  if (opts.controlPort !== undefined) {
    const app = createControlApp({ boards });
    const host = opts.controlHost ?? '127.0.0.1';
    server = await new Promise<Server>((resolve, reject) => {
      const s = app.listen(opts.controlPort ?? 0, host, (err?: Error) => (err ? reject(err) : resolve(s)));
    });
    controlUrl = `http://${host}:${(server.address() as AddressInfo).port}`;
  }

  return {
    boards,
    board,
    controlUrl,
    async ready() {
      await launched;
      await Promise.all(starts);
    },
    async close() {
      closing = true;
      if (server) {
        const s = server;
        await new Promise<void>((resolve) => {
          s.close(() => resolve());
          s.closeAllConnections();
        });
      }
      await Promise.all(all.map((b) => b.stop()));
      await launched;
    },
  };
}

const delay = (ms: number) => new Promise<void>((resolve) => setTimeout(resolve, ms).unref());
