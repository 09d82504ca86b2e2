import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import pg from 'pg';
import { sql } from 'drizzle-orm';
import { createDb } from '../../server/db/client';
import { runMigrations } from '../../server/db/migrate';
import { startRuntime, type Runtime } from '../../server/runtime';
import { provisionBoards } from '../../server/services/device-secrets';
import { startSimulator, type Simulator } from '../../simulator/fleet';
import { testConfig } from '../helpers/config';
import { seedFixture } from '../helpers/fixtures';
import { startLiveWorld, until, type LiveWorld } from '../helpers/live';
import { startOwnPostgres, type OwnPostgres } from '../helpers/own-postgres';

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

async function sentAndStored(sim: Simulator, db: { execute: (q: ReturnType<typeof sql>) => Promise<{ rows: Record<string, unknown>[] }> }) {
  await sim.close(); // each board flushes and waits for its acknowledgements: its counts are final
  const sent = [...sim.boards.values()].reduce((a, b) => a + b.stats.samplesSent, 0);
  const stored = Number((await db.execute(sql`select count(*) as n from readings`)).rows[0].n);
  const dups = Number((await db.execute(sql`select count(*) as n from (select 1 from readings group by controller_id, board_at having count(*) > 1) d`)).rows[0].n);
  // the hourly rollup, merged in each batch's transaction, counts every stored reading once
  const hourly = Number((await db.execute(sql`select coalesce(sum(n), 0) as n from readings_hourly`)).rows[0].n);
  return { sent, stored, dups, hourly };
}

describe('the broker restarts during ingest', () => {
  let w: LiveWorld;
  beforeAll(async () => {
    w = await startLiveWorld({ READING_FLUSH_MS: '50' });
  });
  afterAll(async () => {
    await w?.close();
  });

  it('has every board reconnect and replay, and stores every reading sent exactly once', async () => {
    const sim = await startSimulator({ brokerUrl: w.rt.mqttUrl!, boards: w.boards, seed: 21, sampleIntervalMs: 50, samplesPerMessage: 4, reconnectPeriodMs: 300 });
    await sim.ready();
    await sleep(1500);
    await w.rt.gateway.restartBroker();
    await sleep(1500);
    await w.rt.gateway.restartBroker();
    await until(() => [...sim.boards.values()].every((b) => b.online && b.stats.samplesBuffered === 0), 15_000);
    await sleep(500);
    const reconnects = [...sim.boards.values()].reduce((a, b) => a + b.stats.reconnects, 0);
    const { sent, stored, dups, hourly } = await sentAndStored(sim, w.tdb.db);
    expect(hourly).toBe(stored);
    await w.rt.writer.flush();
    expect(reconnects).toBeGreaterThanOrEqual(4);
    expect(sent).toBeGreaterThan(100);
    expect(dups).toBe(0);
    expect(stored).toBe(sent);
  });
});

describe('PostgreSQL restarts during ingest', () => {
  let own: OwnPostgres;
  let rt: Runtime;
  let url: string;
  beforeAll(async () => {
    own = await startOwnPostgres();
    const admin = new pg.Client({ connectionString: `${own.url}/postgres` });
    await admin.connect();
    await admin.query('create database runnel');
    await admin.end();
    url = `${own.url}/runnel`;
    const dbh = createDb(url, { max: 2 });
    await runMigrations(dbh.db);
    await seedFixture(dbh.db);
    await dbh.close();
  }, 60_000);
  afterAll(async () => {
    await rt?.close().catch(() => {});
    own?.destroy();
  });

  it('buffers while the database is away (with a visible counter), retries, and loses nothing', async () => {
    rt = await startRuntime(testConfig(url, { READING_FLUSH_MS: '50', READING_BUFFER_ROWS: '100000', SCHEDULER: '0' }));
    const boards = await provisionBoards(rt.dbh.db);
    const sim = await startSimulator({ brokerUrl: rt.mqttUrl!, boards, seed: 22, sampleIntervalMs: 50, samplesPerMessage: 4 });
    await sim.ready();
    await sleep(1000);
    own.stop();
    await sleep(2500);
    // the boards keep sending; their publishes wait for their PUBACKs, the writer keeps its batch
    expect(rt.writer.stats.failures).toBeGreaterThan(0);
    expect(rt.writer.stats.buffered).toBeGreaterThan(0);
    const health = await fetch(`${rt.url}/api/health`);
    expect(health.status).toBe(503);
    own.start();
    await until(() => rt.writer.stats.buffered === 0, 20_000);
    await until(() => [...sim.boards.values()].every((b) => b.stats.samplesBuffered === 0), 20_000);
    const { sent, stored, dups } = await sentAndStored(sim, rt.dbh.db);
    expect(rt.writer.stats.maxBuffered).toBeGreaterThan(0);
    expect(dups).toBe(0);
    expect(stored).toBe(sent);
    await rt.close();
  }, 60_000);

  it('past its buffer refuses new readings and says so, and the boards keep them until it can store them', async () => {
    rt = await startRuntime(testConfig(url, { READING_FLUSH_MS: '50', READING_BUFFER_ROWS: '100', SCHEDULER: '0' }));
    // each board has one message in the writer at a time: two boards × 60 samples overflow 100 rows
    const before = Number((await rt.dbh.db.execute(sql`select count(*) as n from readings`)).rows[0].n);
    const boards = await provisionBoards(rt.dbh.db);
    const sim = await startSimulator({ brokerUrl: rt.mqttUrl!, boards, seed: 23, sampleIntervalMs: 10, samplesPerMessage: 60, reconnectPeriodMs: 300 });
    await sim.ready();
    await sleep(500);
    own.stop();
    await sleep(3000);
    expect(rt.writer.stats.refused).toBeGreaterThan(0);
    own.start();
    await until(() => rt.writer.stats.buffered === 0, 20_000);
    await until(() => [...sim.boards.values()].every((b) => b.online && b.stats.samplesBuffered === 0), 30_000);
    await sleep(500);
    const { sent, stored, dups, hourly } = await sentAndStored(sim, rt.dbh.db);
    expect(dups).toBe(0);
    expect(stored - before).toBe(sent);
    expect(hourly).toBe(stored);
  }, 90_000);
});
