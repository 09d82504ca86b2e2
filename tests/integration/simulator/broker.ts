import net from 'node:net';
import { Aedes } from 'aedes';
import mqtt, { type MqttClient } from 'mqtt';
import { parseTopic, schemaFor, topicFor, type MessageKind } from '../../../server/contracts/protocol';

/** A real in-process aedes broker on a free loopback port. */
export async function startBroker(atPort = 0) {
  const broker = await Aedes.createBroker();
  const server = net.createServer(broker.handle);
  await new Promise<void>((resolve) => server.listen(atPort, '127.0.0.1', resolve));
  const port = (server.address() as net.AddressInfo).port;
  return {
    url: `mqtt://127.0.0.1:${port}`,
    broker,
    port,
    async close() {
      const closed = new Promise<void>((resolve) => server.close(() => resolve()));
      await new Promise<void>((resolve) => broker.close(() => resolve()));
      await closed;
    },
  };
}

export type Seen = { serial: string; kind: MessageKind; json: any; retain: boolean; valid: boolean };

/** A plain MQTT client playing the server: records every board message and sends commands. */
export async function startServerClient(url: string) {
  const client: MqttClient = await mqtt.connectAsync(url, { clientId: 'test-server', clean: true, reconnectPeriod: 100 });
  const seen: Seen[] = [];
  client.on('message', (topic, payload, packet) => {
    const t = parseTopic(topic);
    if (!t || t.kind === 'cmd' || t.kind === 'stored') return;
    const json = JSON.parse(payload.toString('utf8'));
    seen.push({ serial: t.serial, kind: t.kind, json, retain: packet.retain, valid: schemaFor[t.kind].safeParse(json).success });
  });
  await client.subscribeAsync('runnel/v1/+/+', { qos: 1 });
  let n = 0;
  return {
    seen,
    of: (serial: string, kind?: MessageKind) => seen.filter((m) => m.serial === serial && (!kind || m.kind === kind)),
    async command(serial: string, body: Record<string, unknown>): Promise<string> {
      const id = (body.id as string | undefined) ?? `cmd-test-${String(++n).padStart(6, '0')}`;
      await client.publishAsync(topicFor(serial, 'cmd'), JSON.stringify({ v: 1, id, at: new Date().toISOString(), ...body }), { qos: 1 });
      return id;
    },
    async raw(serial: string, payload: string) {
      await client.publishAsync(topicFor(serial, 'cmd'), payload, { qos: 1 });
    },
    close: () => client.endAsync(),
  };
}

export async function waitFor<T>(probe: () => T | undefined | false | null, what: string, timeoutMs = 5000): Promise<T> {
  const until = Date.now() + timeoutMs;
  for (;;) {
    const v = probe();
    if (v) return v;
    if (Date.now() > until) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 10));
  }
}

export const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
