import type { Logger } from 'pino';
import type { Command } from '../server/contracts/protocol';
import { startEmbeddedBroker } from './embedded-broker';
import { connectExternalBroker } from './external-client';
import { ProtocolHandler } from './handler';
import { runnelV1Driver } from './runnel-v1-driver';
import type { BoardDriver, DeviceSink, GatewayStats } from './types';

export type { DeviceSink, GatewayStats } from './types';

export type GatewayOptions = {
  /** Start aedes on host:port … */
  embedded?: { host: string; port: number };
  /** … or connect to an existing broker. */
  external?: { url: string; username?: string; password?: string; clientId: string; ingestConnections?: number };
  sink: DeviceSink;
  log: Logger;
  driver?: BoardDriver;
  now?: () => number;
  /** How often each board gets a receipt for what was stored (default 5 s; boards resend after 30 s). */
  receiptIntervalMs?: number;
};

export type Gateway = {
  /** The port boards connect to (embedded mode), or null. */
  port: number | null;
  stats: GatewayStats;
  handler: ProtocolHandler;
  send(serial: string, cmd: Command): Promise<void>;
  /** Stop and start the embedded broker on the same port (fault tests; boards reconnect by themselves). */
  restartBroker(): Promise<void>;
  /** Drop a board's live session (embedded broker only; with an external broker the board keeps it until it reconnects). */
  disconnect(serial: string): boolean;
  close(): Promise<void>;
};

/** The only code that knows MQTT topics and payloads. */
export async function startGateway(opts: GatewayOptions): Promise<Gateway> {
  const driver = opts.driver ?? runnelV1Driver;
  const handler = new ProtocolHandler(opts.sink, opts.log.child({ part: 'gateway' }), opts.now, !opts.external);
  let publish: (topic: string, payload: Buffer, qos: 0 | 1) => Promise<void>;
  let close: () => Promise<void>;
  let port: number | null = null;
  let disconnect = (_serial: string): boolean => false;
  let restart = async (): Promise<void> => {
    throw new Error('the broker is external; restart it where it runs');
  };
  if (opts.external) {
    const link = await connectExternalBroker({ ...opts.external, handler, log: opts.log });
    publish = link.publish;
    close = link.close;
  } else {
    const where = opts.embedded ?? { host: '127.0.0.1', port: 1883 };
    let b = await startEmbeddedBroker({ ...where, handler, sink: opts.sink, log: opts.log });
    port = b.port;
    publish = (t, p, q) => b.publish(t, p, q);
    close = async () => {
      // what is stored by now gets its receipt before the boards' links go (not waiting for what
      // is still being stored: boards that keep sending would hold the stop up; they send again)
      handler.flushReceipts(true);
      await b.close();
    };
    disconnect = (serial) => b.disconnect(serial);
    restart = async () => {
      await b.close();
      b = await startEmbeddedBroker({ host: where.host, port: port!, handler, sink: opts.sink, log: opts.log });
    };
  }
  // Receipts are a courtesy the board can do without for a while (it sends again): QoS 0.
  handler.setReceiptSender((serial, seqs) => {
    publish(driver.receiptTopic(serial), driver.encodeReceipt(seqs), 0).catch((err) =>
      opts.log.debug({ serial, err: (err as Error).message }, 'receipt not sent'),
    );
  }, opts.receiptIntervalMs);
  return {
    port,
    stats: handler.stats,
    handler,
    send: async (serial, cmd) => {
      handler.stats.commandsSent++;
      await publish(driver.commandTopic(serial), driver.encodeCommand(cmd), 1);
    },
    restartBroker: () => restart(),
    disconnect: (serial) => disconnect(serial),
    close: async () => {
      await close();
      handler.setReceiptSender(null);
    },
  };
}
