import { spawn, execFileSync, type ChildProcess } from 'node:child_process';
import fs from 'node:fs';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';
import { mosquittoHash, SERVER_MQTT_USER, writeMosquittoFiles } from '../../server/broker/mosquitto';
import { freePort } from './ports';

/** Debian's Mosquitto on a loopback port of its own, with Runnel's generated credentials and ACL. */
export type Mosquitto = {
  /** Where boards connect. */
  url: string;
  port: number;
  /** Where Runnel's server instances connect (MQTT_URL). */
  serverUrl: string;
  serverPassword: string;
  restart: () => Promise<void>;
  stop: () => Promise<void>;
};


async function waitForPort(port: number, ms = 10_000) {
  const end = Date.now() + ms;
  for (;;) {
    const ok = await new Promise<boolean>((r) => {
      const c = net.connect(port, '127.0.0.1', () => { c.end(); r(true); });
      c.on('error', () => r(false));
    });
    if (ok) return;
    if (Date.now() > end) throw new Error(`mosquitto did not listen on ${port}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

export async function startMosquitto(boards: { serial: string; secret: string }[]): Promise<Mosquitto> {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'runnel-mosquitto-'));
  const port = await freePort();
  const serverPort = await freePort();
  const serverPassword = 'server-' + Math.random().toString(36).slice(2);
  const conf = writeMosquittoFiles(dir, port, [{ user: SERVER_MQTT_USER, hash: mosquittoHash(serverPassword) }, ...boards.map((b) => ({ user: b.serial, hash: mosquittoHash(b.secret) }))], serverPort);
  // mosquitto drops root privileges to its own user: let it read and write its folder
  if (process.getuid?.() === 0) {
    try {
      execFileSync('chown', ['-R', 'mosquitto', dir]);
    } catch {
      /* no mosquitto user: runs as is */
    }
  }
  let proc: ChildProcess | null = null;
  const start = async () => {
    proc = spawn('/usr/sbin/mosquitto', ['-c', conf], { stdio: 'ignore' });
    await waitForPort(port);
    await waitForPort(serverPort);
  };
  const stop = async () => {
    const p = proc;
    proc = null;
    if (!p || p.exitCode !== null) return;
    await new Promise<void>((r) => {
      p.once('exit', () => r());
      p.kill('SIGTERM');
    });
  };
  await start();
  return {
    url: `mqtt://127.0.0.1:${port}`,
    port,
    serverUrl: `mqtt://127.0.0.1:${serverPort}`,
    serverPassword,
    restart: async () => {
      await stop();
      await start();
    },
    stop: async () => {
      await stop();
      fs.rmSync(dir, { recursive: true, force: true });
    },
  };
}
