import net from 'node:net';
import { Aedes, type AuthenticateError, type Client } from 'aedes';
import type { Logger } from 'pino';
import { topicFor, serialSchema } from '../server/contracts/protocol';
import type { ProtocolHandler } from './handler';
import type { DeviceSink } from './types';

export type EmbeddedBroker = {
  broker: Aedes;
  port: number;
  publish(topic: string, payload: Buffer, qos: 0 | 1): Promise<void>;
  /** Drop a board's connection now (its secret was rotated or it was retired); false when it is not connected. */
  disconnect(clientId: string): boolean;
  close(): Promise<void>;
};

function authError(code: 4 | 5, message: string): AuthenticateError {
  return Object.assign(new Error(message), { returnCode: code }) as AuthenticateError;
}

/** Messages aedes delivers at once before it queues them (see createBroker below). */
export const MAX_MESSAGES_IN_DELIVERY = 1_000_000;

/**
 * Aedes on loopback. Boards authenticate with serial + secret; each may publish only under its
 * own topics and subscribe only to its own command and receipt topics. Board messages are consumed inside
 * authorizePublish and the PUBACK is held until the sink has stored them, so an acknowledged
 * publish is a stored publish, and a slow database slows the boards instead of filling memory.
 */
export async function startEmbeddedBroker(opts: {
  host: string;
  port: number;
  handler: ProtocolHandler;
  sink: DeviceSink;
  log: Logger;
}): Promise<EmbeddedBroker> {
  const { handler, sink, log } = opts;
  const broker = await Aedes.createBroker({
    // Messages past aedes' concurrency wait in a queue that is drained recursively: ten thousand
    // commands, or their acknowledgements, in one second overflowed the stack. Each message is
    // already bounded by its sender (a board waits for its PUBACK; commands wait for their slot).
    concurrency: MAX_MESSAGES_IN_DELIVERY,
    heartbeatInterval: 60_000,
    connectTimeout: 15_000,
    authenticate: (client: Client, username, password, done) => {
      const serial = client.id;
      if (!serialSchema.safeParse(serial).success || username !== serial || !password) {
        handler.stats.dropped.bad_credentials++;
        log.warn({ serial }, 'board refused: bad client id or missing credentials');
        return done(authError(4, 'bad credentials'), false);
      }
      sink
        .authenticate(serial, password.toString('utf8'))
        .then((r) => {
          if (!r) {
            handler.stats.dropped.bad_credentials++;
            log.warn({ serial }, 'board refused: wrong secret or unknown controller');
            return done(authError(4, 'bad credentials'), false);
          }
          handler.setLastSeq(serial, r.lastSeq);
          done(null, true);
        })
        .catch((err) => {
          log.error({ err, serial }, 'board authentication failed');
          done(Object.assign(new Error('server unavailable'), { returnCode: 3 }) as AuthenticateError, false);
        });
    },
    authorizePublish: (client, packet, cb) => {
      if (!client) return cb(null); // the broker itself (commands)
      if (packet.topic.startsWith('$SYS')) {
        handler.stats.dropped.acl_publish++;
        log.warn({ serial: client.id, topic: packet.topic }, 'publish to $SYS refused');
        return cb(new Error('$SYS is closed'));
      }
      const payload = Buffer.isBuffer(packet.payload) ? packet.payload : Buffer.from(packet.payload);
      handler
        .handle(client.id, packet.topic, payload)
        .then((out) => {
          if (!out.ok && out.reason === 'acl_publish') return cb(new Error('not your topic'));
          if (!out.ok && out.reason === 'unknown_topic') return cb(new Error('unknown topic'));
          cb(null);
        })
        .catch((err) => {
          // Not stored: refuse, so the board keeps the message and sends it again.
          log.error({ err, serial: client.id }, 'board message not stored');
          cb(new Error('not stored'));
        });
    },
    authorizeSubscribe: (client, sub, cb) => {
      if (sub.topic === topicFor(client.id, 'cmd') || sub.topic === topicFor(client.id, 'stored')) return cb(null, sub);
      handler.stats.dropped.acl_subscribe++;
      log.warn({ serial: client.id, topic: sub.topic }, 'subscription refused');
      cb(null, null);
    },
  });
  // A board's message is consumed in authorizePublish above, and no one may subscribe to it (a
  // board may subscribe only to its own command and receipt topics, which boards may not publish to): routing
  // it through aedes' topic matching and retained store would be work for no one. Only the
  // server's own publishes (commands; client null) are routed.
  const route = broker.publish.bind(broker) as (packet: unknown, client: unknown, done?: (e?: Error | null) => void) => void;
  (broker as unknown as { publish: typeof route }).publish = (packet, client, done) => {
    if (client && typeof client !== 'function') return done?.(null);
    return route(packet, client, done);
  };
  const clients = (broker as unknown as { clients: Record<string, Client | undefined> }).clients;
  broker.on('clientDisconnect', (client) => {
    // A board that reconnected already (session take-over) is not offline.
    const current = clients[client.id];
    if (current && current !== client) return;
    if (serialSchema.safeParse(client.id).success) void sink.offline(client.id, 'disconnect', new Date(handler.now())).catch(() => {});
  });
  broker.on('clientError', (client, err) => log.debug({ serial: client.id, err: err.message }, 'board connection error'));
  // Small PUBACK/SUBACK replies must not wait for Nagle's algorithm.
  const server = net.createServer((socket) => {
    socket.setNoDelay(true);
    broker.handle(socket);
  });
  await new Promise<void>((ok, fail) => {
    server.once('error', fail);
    server.listen(opts.port, opts.host, () => ok());
  });
  const port = (server.address() as net.AddressInfo).port;
  return {
    broker,
    port,
    publish: (topic, payload, qos) =>
      new Promise((ok, fail) =>
        broker.publish({ cmd: 'publish', topic, payload, qos, retain: false, dup: false } as never, (e?: Error | null) => (e ? fail(e) : ok())),
      ),
    disconnect: (clientId) => {
      const c = clients[clientId];
      if (!c) return false;
      c.close();
      return true;
    },
    close: async () => {
      await new Promise<void>((ok) => {
        for (const c of Object.values(clients)) c?.close();
        server.close(() => ok());
      });
      await new Promise<void>((ok) => broker.close(() => ok()));
    },
  };
}
