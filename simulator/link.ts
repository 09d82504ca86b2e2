import net from 'node:net';
import { Duplex } from 'node:stream';
import { MqttClient, type IClientOptions } from 'mqtt';

/** Where a board's broker is: mqtt://host:port or tcp://host:port (plain TCP, like the boards). */
export function parseBrokerUrl(url: string): { host: string; port: number } {
  const u = new URL(url);
  if (u.protocol !== 'mqtt:' && u.protocol !== 'tcp:') throw new Error(`Unsupported broker URL ${url}: use mqtt://host:port`);
  return { host: u.hostname || '127.0.0.1', port: u.port ? Number(u.port) : 1883 };
}

/** A link that never reaches anything: the board's Wi-Fi is down. Closes right after it is made. */
function deadLink(): Duplex {
  const s = new Duplex({ read() {}, write(_chunk, _enc, cb) { cb(); } });
  setImmediate(() => s.destroy());
  return s;
}

/**
 * One board's MQTT client. The stream builder checks `networkUp()` on every (re)connect, so the
 * offline fault is a real outage: mqtt.js keeps retrying and keeps its own store of unacknowledged
 * QoS 1 publishes, which it re-sends (in order) once the network is back.
 */
export function createBoardClient(brokerUrl: string, networkUp: () => boolean, options: IClientOptions): MqttClient {
  const { host, port } = parseBrokerUrl(brokerUrl);
  const build = () => {
    if (!networkUp()) return deadLink();
    const s = net.createConnection({ host, port });
    s.setNoDelay(true);
    return s;
  };
  return new MqttClient(build, { ...options, manualConnect: true, protocolId: 'MQTT', protocolVersion: 4 });
}
