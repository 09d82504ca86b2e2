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
  const client = await mqtt.connectAsync(opts.url, {
    clientId: opts.clientId,
    username: opts.username,
    password: opts.password,
    clean: false,
    reconnectPeriod: 1000,
    customHandleAcks: (topic, payload, _packet, done) => {
      handler
        .handle(null, topic, Buffer.from(payload))
        .then(() => done(0))
        .catch((err) => {
          log.error({ err, topic }, 'board message not stored');
          done(0x80);
        });
    },
  });
  client.on('error', (err) => log.warn({ err: err.message }, 'external broker error'));
  await client.subscribeAsync(
    ['ack', 'telemetry', 'event'].map((k) => `$share/${share}/${TOPIC_ROOT}/+/${k}`).concat([`${TOPIC_ROOT}/+/state`, `${TOPIC_ROOT}/+/status`]),
    { qos: 1 },
  );
  return {
    publish: async (topic, payload, qos) => {
      await client.publishAsync(topic, payload, { qos });
    },
    close: async () => {
      await client.endAsync();
    },
  };
}
