import mqtt from 'mqtt';
import type { Logger } from 'pino';
import { TOPIC_ROOT } from '../server/contracts/protocol';
import type { ProtocolHandler } from './handler';

export type ExternalLink = {
  publish(topic: string, payload: Buffer, qos: 0 | 1): Promise<void>;
  close(): Promise<void>;
};

/**
 * With MQTT_URL set, the gateway is a client of an existing broker, which then authenticates
 * boards and enforces topic ACLs itself (docs/deployment.md).
 *
 * mqtt.js hands an MQTT connection's incoming messages over one at a time: the next is read only
 * once the previous one's PUBACK has gone out, and the PUBACK is held until the message is stored.
 * So one connection carries one message per database round trip. The instance therefore opens
 * - one control connection for acknowledgements, relay states and online status (not shared:
 *   every instance needs them, and nothing slow stands in their way), and
 * - `ingestConnections` connections that join the shared subscription for telemetry, so the
 *   broker spreads the boards' readings over them, and over every instance; each message is
 *   stored once, and several are stored at a time, and
 * - `EVENT_CONNECTIONS` connections that share the boards' valve events the same way, apart
 *   from the readings.
 */
/** Connections per instance in the shared subscription for valve events (each stores one event at a time; events are batched into one insert). */
const EVENT_CONNECTIONS = 16;

export async function connectExternalBroker(opts: {
  url: string;
  username?: string;
  password?: string;
  clientId: string;
  shareGroup?: string;
  ingestConnections?: number;
  handler: ProtocolHandler;
  log: Logger;
}): Promise<ExternalLink> {
  const { handler, log } = opts;
  const share = opts.shareGroup ?? 'runnel';
  const n = Math.max(1, opts.ingestConnections ?? 8);

  /**
   * `holdAck`: the PUBACK waits until the message is stored (telemetry and valve events, shared).
   * Without it (the control connection: acknowledgements, relay states, online status) the PUBACK
   * goes out at once and the message is handled beside the next ones: each instance gets its own
   * copy of these, relay states and status are retained by the broker and come again on a
   * resubscribe, and a lost acknowledgement is a command retried. Held, five thousand boards
   * coming online would queue every command's acknowledgement behind five thousand status writes.
   */
  const connect = async (clientId: string, topics: string[], holdAck: boolean) => {
    const client: mqtt.MqttClient = await mqtt.connectAsync(opts.url, {
      clientId,
      username: opts.username,
      password: opts.password,
      clean: false,
      // Back before the boards: Mosquitto 2.0 does not keep shared subscriptions across its own
      // restart, and a board's message that arrives before any instance has subscribed again is
      // accepted by the broker and delivered to no one (docs/deployment.md).
      reconnectPeriod: 250,
      // MQTT 5: mqtt.js lets us hold each PUBACK (customHandleAcks) only on protocol version 5
      protocolVersion: 5,
      properties: { sessionExpiryInterval: 3600 },
      customHandleAcks: (topic, payload, _packet, done) => {
        if (!holdAck) {
          // (the handler takes each board's place in its lane before its first await: order holds)
          handler.handle(null, topic, Buffer.from(payload)).catch((err) => log.warn({ err: (err as Error).message, topic }, 'board control message not applied'));
          return done(0);
        }
        handler
          .handle(null, topic, Buffer.from(payload))
          .then(() => done(0))
          .catch((err) => {
            // Not stored: no PUBACK. Dropping the connection makes the broker deliver it again.
            log.error({ err: (err as Error).message, topic, clientId }, 'board message not stored; reconnecting for a redelivery');
            client.stream.destroy();
          });
      },
    });
    client.on('error', (err) => log.warn({ err: err.message, clientId }, 'external broker error'));
    await client.subscribeAsync(topics, { qos: 1 });
    // Subscribe again on every reconnect, even when the broker says it kept our session: a broker
    // restored from its persistence file does not always bring shared subscriptions back.
    // (mqtt.js skips topics it thinks it has already, so the map says `resubscribe`.)
    client.on('connect', () => {
      const again: mqtt.ISubscriptionMap = Object.fromEntries(topics.map((t) => [t, { qos: 1 as const }]));
      again.resubscribe = true;
      client.subscribe(again, (err) => err && log.warn({ err: err.message, clientId }, 'resubscribe failed'));
    });
    return { client, topics };
  };

  const controlTopics = ['ack', 'state', 'status'].map((k) => `${TOPIC_ROOT}/+/${k}`);
  const readingTopics = [`$share/${share}/${TOPIC_ROOT}/+/telemetry`];
  const eventTopics = [`$share/${share}/${TOPIC_ROOT}/+/event`];
  const control = await connect(opts.clientId, controlTopics, false);
  const ingest = await Promise.all(Array.from({ length: n }, (_, i) => connect(`${opts.clientId}-in${i}`, readingTopics, true)));
  // Valve events on connections of their own: a fleet's readings waiting in the broker for a
  // busy instance do not hold a valve change up behind them.
  const events = await Promise.all(Array.from({ length: EVENT_CONNECTIONS }, (_, i) => connect(`${opts.clientId}-ev${i}`, eventTopics, true)));
  const all = [control, ...ingest, ...events];

  return {
    publish: async (topic, payload, qos) => {
      await control.client.publishAsync(topic, payload, { qos });
    },
    close: async () => {
      // Leave the share group first, or the broker keeps queueing this instance's share of the
      // boards' messages for a session that is going away. (After a crash the queue waits for
      // the instance to come back under the same client id: give each instance a stable one.)
      await Promise.all(all.map((c) => c.client.unsubscribeAsync(c.topics).catch(() => {})));
      // finish storing what was received, so its PUBACKs go out before the sessions end
      await Promise.race([handler.idle(), new Promise((r) => setTimeout(r, 10_000))]);
      handler.flushReceipts(true);
      await Promise.all(
        all.map((c) => c.client.endAsync(false, { properties: { sessionExpiryInterval: 0 } } as never).catch(() => c.client.end(true))),
      );
    },
  };
}
