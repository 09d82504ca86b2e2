import { spawn, type ChildProcess } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import readline from 'node:readline';
import { sql } from 'drizzle-orm';
import mqtt from 'mqtt';
import WebSocket from 'ws';
import { TOPIC_ROOT } from '../server/contracts/protocol';
import { SERVER_MQTT_USER } from '../server/broker/mosquitto';
import { startMosquitto } from '../tests/helpers/mosquitto';
import { benchDb, benchEnv, freePort, nodeProgram, percentile, rssMb, round, signIn, sleep, waitHealthy } from './common';
import { BENCH_PASSWORD, buildFleet } from './fleet-world';

export type ScaleResult = {
  controllers: number; instances: 2; readingsPerSecond: number; lost: number; valveEventP99Ms: number; rssMbPerInstance: number[];
  /** What the boards offered: readings per second per board, and in all. */
  readingsPerSecondPerBoard: number; offeredReadingsPerSecond: number;
};

/**
 * Readings per second each board takes (five to a message). Fixed per board, so the table shows
 * how the same boards load the instances as their number grows; chosen so 5,000 boards stay
 * inside what these 2 cores carry. Above it the backlog grows without end (first in the boards'
 * simulator, which shares the cores) and a valve event's latency is only how long the
 * run lasted, not anything of the product's.
 */
const SCALE_RATE = Number(process.env.BENCH_SCALE_SAMPLES_PER_SECOND ?? 2);

/**
 * N boards (own process) → Mosquitto → two Runnel instances (own processes) → one PostgreSQL.
 * Readings persisted per second, lost readings, valve event p99 to a browser on the instance
 * that did not send the command, and each instance's peak memory.
 */
export async function benchScaleOne(n: number, windowMs = 20_000): Promise<ScaleResult> {
  const db = await benchDb(`scale${n}`);
  const { boards, zoneIds } = await buildFleet(db, n);
  const broker = await startMosquitto(boards);
  const ports = [await freePort(), await freePort()];
  const instances: ChildProcess[] = ports.map((port, i) =>
    spawn(process.execPath, nodeProgram('server', 'server/index.ts'), {
      // BENCH_SERVER_LOG_DIR: keep each instance's log there (scale-<boards>-<instance>.log)
      stdio: ['ignore', process.env.BENCH_SERVER_LOG_DIR ? fs.openSync(path.join(process.env.BENCH_SERVER_LOG_DIR, `scale-${n}-${i}.log`), 'w') : 'ignore', 'inherit'],
      env: {
        ...process.env, ...benchEnv(db.url), PORT: String(port),
        MQTT_URL: broker.serverUrl, MQTT_USERNAME: SERVER_MQTT_USER, MQTT_PASSWORD: broker.serverPassword, INSTANCE_ID: `bench-${i}`, LIVE_RELAY: '1',
        ...(process.env.BENCH_SERVER_LOG_DIR ? { LOG_LEVEL: 'info' } : {}),
      },
    }),
  );
  const urls = ports.map((p) => `http://127.0.0.1:${p}`);
  await Promise.all(urls.map((u) => waitHealthy(u)));
  const fleetFile = path.join(os.tmpdir(), `runnel-scale-fleet-${n}.json`);
  fs.writeFileSync(fleetFile, JSON.stringify({ boards }));
  const perMessage = 5;
  const sim = spawn(process.execPath, [...nodeProgram('sim-child', 'bench/sim-child.ts'), fleetFile, broker.url, String(1000 / SCALE_RATE), String(perMessage)], { stdio: ['ignore', 'pipe', 'inherit'] });
  const lines = readline.createInterface({ input: sim.stdout! });
  const seen: Record<string, unknown>[] = [];
  lines.on('line', (l) => {
    try {
      seen.push(JSON.parse(l));
    } catch {
      /* not ours */
    }
  });
  const waitFor = async (key: string, ms = 300_000) => {
    const end = Date.now() + ms;
    while (Date.now() < end) {
      const hit = seen.find((m) => key in m);
      if (hit) return hit;
      await sleep(100);
    }
    throw new Error(`simulator did not report ${key}`);
  };
  await waitFor('ready');
  // BENCH_VERBOSE: a plain subscriber beside the instances times the boards' valve events as
  // the broker hands them out, to tell the broker's share of a delay from the instances'.
  const monLat: number[] = [];
  const monitor = process.env.BENCH_VERBOSE
    ? await mqtt.connectAsync(broker.serverUrl, { clientId: 'bench-monitor', username: SERVER_MQTT_USER, password: broker.serverPassword })
    : null;
  if (monitor) {
    await monitor.subscribeAsync(`${TOPIC_ROOT}/+/event`, { qos: 0 });
    monitor.on('message', (_t, p) => {
      if (measuring) monLat.push(Date.now() - Date.parse(JSON.parse(String(p)).at));
    });
  }
  const [cookieA, cookieB] = [await signIn(urls[0], 'bench@runnel.test', BENCH_PASSWORD), await signIn(urls[1], 'bench@runnel.test', BENCH_PASSWORD)];
  const ws = new WebSocket(`${urls[1].replace('http', 'ws')}/ws`, { headers: { cookie: cookieB, origin: urls[1] } });
  const lat: number[] = [];
  let measuring = false;
  ws.on('message', (d) => {
    const t = Date.now();
    const m = JSON.parse(String(d));
    if (measuring && m.type === 'valve') lat.push(t - Date.parse(m.at));
  });
  await new Promise((r) => ws.once('open', r));
  await sleep(5000);
  const count = async () => Number((await db.db.execute(sql`select count(*) as n from readings`)).rows[0].n);
  measuring = true;
  const c0 = await count();
  const t0 = Date.now();
  const timer = setInterval(() => {
    const z = zoneIds[Math.floor(Math.random() * zoneIds.length)];
    void fetch(`${urls[0]}/api/zones/${z}/start`, { method: 'POST', headers: { 'content-type': 'application/json', cookie: cookieA, origin: urls[0] }, body: JSON.stringify({ minutes: 1 }) }).catch(() => {});
  }, 200);
  await sleep(windowMs);
  clearInterval(timer);
  const c1 = await count();
  const t1 = Date.now();
  measuring = false;
  if (process.env.BENCH_VERBOSE) {
    // where a valve event's time goes: board → an instance storing it, and the rest
    const r = await db.db.execute(sql`select count(*) n, percentile_cont(array[0.5, 0.99]) within group (order by extract(epoch from received_at - board_at) * 1000) p
      from valve_events where received_at > now() - make_interval(secs => ${windowMs / 1000})`);
    console.log(`  valve events stored in the window: ${r.rows[0].n}, board → stored p50/p99 ms: ${r.rows[0].p}; at the broker's plain subscriber p50 ${percentile(monLat, 50)} p99 ${percentile(monLat, 99)}; browser p50 ${percentile(lat, 50)} p99 ${percentile(lat, 99)}`);
  }
  const rss = instances.map((p) => rssMb(p.pid!));
  sim.kill('SIGINT');
  const totals = (await waitFor('done')) as { sent: number };
  // The broker may still hold what the instances have not taken yet: count once the count stops
  // growing (up to two minutes), so "lost" means lost, not "still queued".
  let stored = await count();
  for (let quiet = 0, t = Date.now(); quiet < 3 && Date.now() - t < 120_000; ) {
    await sleep(1000);
    const now = await count();
    quiet = now === stored ? quiet + 1 : 0;
    stored = now;
  }
  ws.close();
  await monitor?.endAsync();
  for (const p of instances) p.kill('SIGTERM');
  await Promise.all(instances.map((p) => new Promise((r) => (p.exitCode !== null ? r(null) : p.once('exit', r)))));
  await broker.stop();
  await db.drop();
  fs.rmSync(fleetFile, { force: true });
  return {
    controllers: n, instances: 2,
    readingsPerSecond: Math.round((c1 - c0) / ((t1 - t0) / 1000)),
    lost: Math.max(0, totals.sent - stored),
    valveEventP99Ms: round(percentile(lat, 99)),
    rssMbPerInstance: rss,
    readingsPerSecondPerBoard: SCALE_RATE,
    offeredReadingsPerSecond: Math.round(n * SCALE_RATE),
  };
}

export async function benchScale(): Promise<ScaleResult[]> {
  const out: ScaleResult[] = [];
  for (const n of (process.env.BENCH_SCALE_BOARDS ?? '100,1000,5000').split(',').map(Number)) {
    const r = await benchScaleOne(n);
    console.log(`scale ${n} boards / 2 instances: ${r.readingsPerSecond} readings/s, lost ${r.lost}, valve p99 ${r.valveEventP99Ms} ms, rss ${r.rssMbPerInstance.join(' / ')} MB`);
    out.push(r);
  }
  return out;
}
