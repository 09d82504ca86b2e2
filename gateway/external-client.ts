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
 * boards and enforces topic ACLs itself (docs/deployment.md). Board messages come through a
 * shared subscription, so several Runnel instances split the ingest; the PUBACK to the broker
 * is held until the message is stored.
 */
export async function connectExternalBroker(opts: {
  url: string;
  username?: string;
  password?: string;
  clientId: string;
  shareGroup?: string;
  handler: ProtocolHandler;
  log: Logger;
}): Promise<ExternalLink> {
  const { handler, log } = opts;
  const share = opts.shareGroup ?? 'runnel';
  const client: mqtt.MqttClient = await mqtt.connectAsync(opts.url, {
    clientId: opts.clientId,
    username: opts.username,
    password: opts.password,
    clean: false,
    reconnectPeriod: 1000,
    // MQTT 5: mqtt.js lets us hold each PUBACK (customHandleAcks) only on protocol version 5
    protocolVersion: 5,
    properties: { sessionExpiryInterval: 3600 },
    customHandleAcks: (topic, payload, _packet, done) => {
      handler
        .handle(null, topic, Buffer.from(payload))
        .then(() => done(0))
        .catch((err) => {
          // Not stored: no PUBACK. Dropping the connection makes the broker deliver it again.
          log.error({ err: (err as Error).message, topic }, 'board message not stored; reconnecting for a redelivery');
          client.stream.destroy();
        });
    },
  });
  client.on('error', (err) => log.warn({ err: err.message }, 'external broker error'));
  // Telemetry and events are split between instances (each stored once); acknowledgements go to
  // every instance, because only the one that sent the command is waiting for it; retained state
  // and status go to every instance, so each knows every board's relays and whether it is online.
  const topics = ['telemetry', 'event'].map((k) => `$share/${share}/${TOPIC_ROOT}/+/${k}`).concat([`${TOPIC_ROOT}/+/ack`, `${TOPIC_ROOT}/+/state`, `${TOPIC_ROOT}/+/status`]);
  await client.subscribeAsync(topics, { qos: 1 });
  // Subscribe again on every reconnect, even when the broker says it kept our session: a broker
  // restored from its persistence file does not always bring shared subscriptions back.
  client.on('connect', () => {
    client.subscribe(topics, { qos: 1 }, (err) => err && log.warn({ err: err.message }, 'resubscribe failed'));
  });
  return {
    publish: async (topic, payload, qos) => {
      await client.publishAsync(topic, payload, { qos });
    },
    close: async () => {
      // Leave the share group first, or the broker keeps queueing this instance's share of the
      // boards' messages for a session that is going away. (After a crash the queue waits for
      // the instance to come back under the same client id: give each instance a stable one.)
      await client.unsubscribeAsync(topics).catch(() => {});
      // finish storing what was received, so its PUBACKs go out before the session ends
      await Promise.race([handler.idle(), new Promise((r) => setTimeout(r, 10_000))]);
      await client.endAsync(false, { properties: { sessionExpiryInterval: 0 } } as never).catch(() => client.end(true));
    },
  };
}
