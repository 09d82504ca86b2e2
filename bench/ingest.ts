import { spawn } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import readline from 'node:readline';
import { sql } from 'drizzle-orm';
import WebSocket from 'ws';
import { benchDb, benchEnv, freePort, nodeProgram, percentile, rssMb, round, signIn, sleep, waitHealthy } from './common';
import { BENCH_PASSWORD, buildFleet } from './fleet-world';

export type IngestResult = {
  controllers: number;
  readingsPerSecond: number;
  lost: number;
  valveEventP50Ms: number;
  valveEventP99Ms: number;
  serverRssMb: number;
  sent: number;
  stored: number;
  /** Rows stored twice (same board, time and sequence number); must be 0. */
  duplicates: number;
  valveEvents: number;
};

/**
 * N boards in a simulator process of their own, each sending `samplesPerSecond` readings in one
 * message a second, against the whole server in a process of its own (compiled, as `npm start`
 * runs it, with its embedded broker). Readings persisted per second over a measuring window; lost
 * = samples the boards had acknowledged minus rows stored; valve event latency = board publish
 * time to the receipt of a WebSocket client in this process, while zones are started through the
 * API; server RSS = the server process's peak resident memory.
 */
export async function benchIngest(n: number, opts: { windowMs?: number; samplesPerSecond?: number } = {}): Promise<IngestResult> {
  const windowMs = opts.windowMs ?? 20_000;
  const perSecond = opts.samplesPerSecond ?? 25;
  const db = await benchDb(`ingest${n}`);
  const { boards, zoneIds } = await buildFleet(db, n);
  const [port, mqttPort] = [await freePort(), await freePort()];
  const url = `http://127.0.0.1:${port}`;
  const profile = process.env.BENCH_PROFILE ? ['--cpu-prof', `--cpu-prof-dir=${process.env.BENCH_PROFILE}`, `--cpu-prof-name=ingest-${n}-server.cpuprofile`] : [];
  // BENCH_SERVER_NODE_FLAGS: node options to try on the server (heap sizes, --heapsnapshot-signal…)
  const flags = (process.env.BENCH_SERVER_NODE_FLAGS ?? '').split(' ').filter(Boolean);
  const server = spawn(process.execPath, [...flags, ...profile, ...nodeProgram('server', 'server/index.ts')], {
    stdio: ['ignore', 'ignore', 'inherit'],
    env: {
      ...process.env, ...benchEnv(db.url), PORT: String(port), MQTT_PORT: String(mqttPort), ACK_TIMEOUT_MS: '5000',
    },
  });
  const exited = new Promise((r) => server.once('exit', r));
  await waitHealthy(url);
  const fleetFile = path.join(os.tmpdir(), `runnel-bench-fleet-${n}.json`);
  fs.writeFileSync(fleetFile, JSON.stringify({ boards }));
  const simProfile = process.env.BENCH_PROFILE ? ['--cpu-prof', `--cpu-prof-dir=${process.env.BENCH_PROFILE}`, `--cpu-prof-name=ingest-${n}-sim.cpuprofile`] : [];
  const child = spawn(process.execPath, [...simProfile, ...nodeProgram('sim-child', 'bench/sim-child.ts'), fleetFile, `mqtt://127.0.0.1:${mqttPort}`, String(Math.round(1000 / perSecond)), String(perSecond)], { stdio: ['ignore', 'pipe', 'inherit'] });
  const lines = readline.createInterface({ input: child.stdout! });
  const msgs: Record<string, unknown>[] = [];
  const waitFor = (key: string) =>
    new Promise<Record<string, unknown>>((resolve) => {
      const hit = msgs.find((m) => key in m);
      if (hit) return resolve(hit);
      lines.on('line', function on(l) {
        try {
          const m = JSON.parse(l);
          msgs.push(m);
          if (key in m) {
            lines.off('line', on);
            resolve(m);
          }
        } catch {
          /* not ours */
        }
      });
    });
  await waitFor('ready');
  // a browser's view: sign in and listen on /ws
  const cookie = await signIn(url, 'bench@runnel.test', BENCH_PASSWORD);
  const ws = new WebSocket(`${url.replace('http', 'ws')}/ws`, { headers: { cookie, origin: url } });
  const latencies: number[] = [];
  let measuring = false;
  ws.on('message', (d) => {
    const t = Date.now();
    const m = JSON.parse(String(d));
    if (measuring && m.type === 'valve') latencies.push(t - Date.parse(m.at));
  });
  await new Promise((r) => ws.once('open', r));
  await sleep(5000); // warm up: every board connected and sending
  const count = async () => Number((await db.db.execute(sql`select count(*) as n from readings`)).rows[0].n);
  measuring = true;
  const c0 = await count();
  const t0 = Date.now();
  // start a random zone for a minute through the API, ten times a second, while measuring
  const started = new Set<number>();
  const valveTimer = setInterval(() => {
    const z = zoneIds[Math.floor(Math.random() * zoneIds.length)];
    if (started.has(z)) return;
    started.add(z);
    void fetch(`${url}/api/zones/${z}/start`, { method: 'POST', headers: { 'content-type': 'application/json', cookie, origin: url }, body: JSON.stringify({ minutes: 1 }) }).catch(() => {});
  }, 100);
  // BENCH_VERBOSE=1: each second, the rows stored and the server's resident memory
  const rssNow = () => Math.round(Number(/VmRSS:\s+(\d+) kB/.exec(fs.readFileSync(`/proc/${server.pid}/status`, 'utf8'))?.[1]) / 1024);
  let last = c0;
  const verbose = process.env.BENCH_VERBOSE
    ? setInterval(async () => {
        const c = await count();
        console.log(`  +${Math.round((Date.now() - t0) / 1000)} s: ${c - last} rows, server RSS ${rssNow()} MB, valve events ${latencies.length}`);
        last = c;
      }, 1000)
    : null;
  await sleep(windowMs);
  clearInterval(valveTimer);
  if (verbose) clearInterval(verbose);
  const c1 = await count();
  const t1 = Date.now();
  measuring = false;
  const serverRssMb = rssMb(server.pid!);
  if (flags.some((f) => f.startsWith('--heapsnapshot-signal'))) {
    server.kill('SIGUSR2');
    await sleep(30_000);
  }
  child.kill('SIGINT');
  const totals = (await waitFor('done')) as { sent: number; taken: number };
  // Whatever the broker acknowledged may still be on its way through the server: wait until the
  // count stops moving (2 s without a change), then count what was never stored.
  let stored = -1;
  for (let still = 0; still < 4; ) {
    await sleep(500);
    const now = await count();
    still = now === stored ? still + 1 : 0;
    stored = now;
    if (stored >= totals.sent) break;
  }
  const duplicates = Number((await db.db.execute(sql`select count(*) - count(distinct (controller_id, board_at, seq)) as n from readings`)).rows[0].n);
  if (duplicates > 0) {
    const rows = (await db.db.execute(sql`select controller_id, board_at, seq, count(*) as n, array_agg(received_at) as received, array_agg(moisture_raw) as raw from readings group by 1, 2, 3 having count(*) > 1 limit 5`)).rows;
    console.error('duplicate readings (first 5):', JSON.stringify(rows));
  }
  if (totals.sent > stored) console.error(`readings not stored: ${totals.sent - stored} of ${totals.sent}`);
  ws.close();
  server.kill('SIGTERM');
  await exited;
  await db.drop();
  fs.rmSync(fleetFile, { force: true });
  return {
    controllers: n,
    readingsPerSecond: Math.round((c1 - c0) / ((t1 - t0) / 1000)),
    lost: Math.max(0, totals.sent - stored),
    valveEventP50Ms: round(percentile(latencies, 50)),
    valveEventP99Ms: round(percentile(latencies, 99)),
    serverRssMb,
    sent: totals.sent,
    stored,
    duplicates,
    valveEvents: latencies.length,
  };
}

/** PostgreSQL's own COPY rate into the readings table, from one connection, on this machine. */
export async function benchRawCopy(rows = 1_000_000): Promise<number> {
  const db = await benchDb('copy');
  const { from: copyFrom } = await import('pg-copy-streams');
  const { pipeline } = await import('node:stream/promises');
  const { Readable } = await import('node:stream');
  const client = await db.pool.connect();
  const now = Date.now();
  function* gen() {
    let chunk = '';
    for (let i = 0; i < rows; i++) {
      const at = new Date(now + i).toISOString();
      chunk += `${(i % 1000) + 1}\t${at}\t${at}\t${at}\t${i}\tf\t1800\t31.5\t25.1\t12.3\t-60\n`;
      if (chunk.length > 512_000) {
        yield chunk;
        chunk = '';
      }
    }
    if (chunk) yield chunk;
  }
  const t0 = performance.now();
  await pipeline(Readable.from(gen()), client.query(copyFrom('copy readings (controller_id, at, board_at, received_at, seq, rain, moisture_raw, moisture_pct, supply_v, flow_lpm, rssi) from stdin')));
  const secs = (performance.now() - t0) / 1000;
  client.release();
  await db.drop();
  return Math.round(rows / secs);
}
