import pg from 'pg';
import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import net from 'node:net';
import path from 'node:path';
import { createDb, type DbHandle } from '../server/db/client';
import { runMigrations } from '../server/db/migrate';
import { loadConfig, type Config } from '../server/config';
import { projectRoot } from '../server/paths';

export function adminUrl(): string {
  const u = process.env.BENCH_ADMIN_DATABASE_URL ?? process.env.TEST_ADMIN_DATABASE_URL;
  if (!u) throw new Error('BENCH_ADMIN_DATABASE_URL is not set: run `npm run bench`, which starts PostgreSQL');
  return u;
}

export type BenchDb = DbHandle & { url: string; drop: () => Promise<void> };

/** A fresh, migrated database for one benchmark. */
export async function benchDb(label: string): Promise<BenchDb> {
  const name = `runnel_bench_${label}_${randomBytes(3).toString('hex')}`;
  const admin = new pg.Client({ connectionString: `${adminUrl()}/postgres` });
  await admin.connect();
  await admin.query(`create database "${name}"`);
  await admin.end();
  const url = `${adminUrl()}/${name}`;
  const dbh = createDb(url, { max: 4 });
  await runMigrations(dbh.db);
  return {
    ...dbh, url,
    drop: async () => {
      await dbh.close().catch(() => {});
      const a = new pg.Client({ connectionString: `${adminUrl()}/postgres` });
      await a.connect();
      await a.query(`drop database if exists "${name}" with (force)`);
      await a.end();
    },
  };
}

/**
 * The settings of a benchmark's server, as environment variables: test mode, no demo, quiet logs,
 * no scheduler or offline timeout unless asked. The writer's READING_* and the gateway's MQTT_*
 * settings may be tried from the environment of `npm run bench`.
 */
export function benchEnv(url: string, extra: Record<string, string> = {}): Record<string, string> {
  const tried = Object.fromEntries(Object.entries(process.env).filter(([k]) => k.startsWith('READING_') || k.startsWith('MQTT_INGEST')) as [string, string][]);
  return {
    NODE_ENV: 'test', RUNNEL_DEMO: '0', HOST: '127.0.0.1', DATABASE_URL: url, PORT: '0', MQTT_PORT: '0', SIM_PORT: '0', WEATHER_PORT: '0', LOG_LEVEL: 'error',
    LOGIN_RATE_LIMIT: '10000', SCHEDULER: '0', OFFLINE_AFTER_SECONDS: '3600', ...tried, ...extra,
  };
}

/** The same settings for a server started in this process. */
export function benchConfig(url: string, extra: Record<string, string> = {}): Config {
  return loadConfig(benchEnv(url, extra));
}

export function percentile(xs: number[], p: number): number {
  if (!xs.length) return NaN;
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.min(s.length - 1, Math.max(0, Math.ceil((p / 100) * s.length) - 1))];
}

export const round = (v: number, d = 1) => Math.round(v * 10 ** d) / 10 ** d;
export const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

/** BENCH_PROFILE=dir: a CPU profile and an allocation profile of the server's process over a window the benchmark chooses. */
export async function startProfile() {
  const inspector = await import('node:inspector/promises');
  const session = new inspector.Session();
  session.connect();
  await session.post('Profiler.enable');
  await session.post('Profiler.start');
  await session.post('HeapProfiler.enable');
  await session.post('HeapProfiler.startSampling', { samplingInterval: 64 * 1024 });
  return {
    async stop(file: string) {
      const { profile } = await session.post('Profiler.stop');
      const { profile: heap } = await session.post('HeapProfiler.stopSampling');
      fs.mkdirSync(path.dirname(file), { recursive: true });
      fs.writeFileSync(file, JSON.stringify(profile));
      fs.writeFileSync(file.replace(/\.cpuprofile$/, '.heapprofile'), JSON.stringify(heap));
      session.disconnect();
    },
  };
}

/**
 * The arguments that start one of our programs in a process of its own: compiled (.build/node,
 * which `npm run bench` builds first and then sets RUNNEL_COMPILED=1) or from source under tsx.
 */
export function nodeProgram(compiled: 'server' | 'sim-child', source: string): string[] {
  return process.env.RUNNEL_COMPILED === '1' ? [path.join(projectRoot, '.build/node', `${compiled}.mjs`)] : ['--import', 'tsx', source];
}

export async function freePort(): Promise<number> {
  return new Promise((resolve) => {
    const s = net.createServer();
    s.listen(0, '127.0.0.1', () => {
      const p = (s.address() as net.AddressInfo).port;
      s.close(() => resolve(p));
    });
  });
}

/** A process's peak resident memory so far (VmHWM), MB. */
export const rssMb = (pid: number) => {
  const m = /VmHWM:\s+(\d+) kB/.exec(fs.readFileSync(`/proc/${pid}/status`, 'utf8'));
  return m ? Math.round(Number(m[1]) / 1024) : NaN;
};

export async function waitHealthy(url: string, ms = 60_000) {
  const end = Date.now() + ms;
  while (Date.now() < end) {
    try {
      if ((await fetch(`${url}/api/health`)).ok) return;
    } catch {
      /* starting */
    }
    await sleep(200);
  }
  throw new Error(`${url} did not come up`);
}

/** A session cookie for `email` on the server at `url`. */
export async function signIn(url: string, email: string, password: string): Promise<string> {
  const r = await fetch(`${url}/api/auth/sign-in`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ email, password }) });
  if (!r.ok) throw new Error(`sign-in at ${url} failed: ${r.status}`);
  return r.headers.getSetCookie().map((c) => c.split(';')[0]).join('; ');
}
