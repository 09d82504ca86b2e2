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
  external?: { url: string; username?: string; password?: string; clientId: string };
  sink: DeviceSink;
  log: Logger;
  driver?: BoardDriver;
};

export type Gateway = {
  /** The port boards connect to (embedded mode), or null. */
  port: number | null;
  stats: GatewayStats;
  handler: ProtocolHandler;
  send(serial: string, cmd: Command): Promise<void>;
  close(): Promise<void>;
};

/** The only code that knows MQTT topics and payloads. */
export async function startGateway(opts: GatewayOptions): Promise<Gateway> {
  const driver = opts.driver ?? runnelV1Driver;
  const handler = new ProtocolHandler(opts.sink, opts.log.child({ part: 'gateway' }));
  let publish: (topic: string, payload: Buffer, qos: 0 | 1) => Promise<void>;
  let close: () => Promise<void>;
  let port: number | null = null;
  if (opts.external) {
    const link = await connectExternalBroker({ ...opts.external, handler, log: opts.log });
    publish = link.publish;
    close = link.close;
  } else {
    const b = await startEmbeddedBroker({ ...(opts.embedded ?? { host: '127.0.0.1', port: 1883 }), handler, sink: opts.sink, log: opts.log });
    publish = b.publish;
    close = b.close;
    port = b.port;
  }
  return {
    port,
    stats: handler.stats,
    handler,
    send: async (serial, cmd) => {
      handler.stats.commandsSent++;
      await publish(driver.commandTopic(serial), driver.encodeCommand(cmd), 1);
    },
    close,
  };
}
