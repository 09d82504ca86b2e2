import { sql } from 'drizzle-orm';
import { performance } from 'node:perf_hooks';
import { DateTime } from 'luxon';
import type pg from 'pg';
import { drizzle } from 'drizzle-orm/node-postgres';
import type { Db } from '../server/db/client';
import { runHistoryQuerySchema, waterUseQuerySchema } from '../server/contracts/history';
import { rebuildRollups } from '../server/history/rollup';
import { recomputeHours } from '../server/history/readings-rollup';
import { controllerReadings } from '../server/history/readings';
import { listRunHistory } from '../server/history/runs';
import { siteWaterUse } from '../server/history/water-use';
import type { Actor } from '../server/services/actor';
import { benchDb, percentile, round } from './common';

export type HistoryBenchResult = { sites: 200; runHistoryP95Ms: number; dailyWaterUseP95Ms: number };

const SITES = 200;
const ZONES_PER_SITE = 6;
const READING_EVERY = '15 minutes';
const TIMEZONES = ['America/Denver', 'Europe/Lisbon', 'Australia/Sydney', 'America/New_York', 'Europe/Berlin'];

const log = (msg: string) => process.stderr.write(`[history bench] ${msg}\n`);

/**
 * One year of history for 200 sites, generated inside PostgreSQL (INSERT … SELECT over
 * generate_series): a controller and six zones per site, a program that runs every zone every
 * day (with rain holds, restriction skips, failures and manual stops mixed in), readings every
 * 15 minutes from every controller, daily weather, then the daily water-use and hourly readings rollups.
 */
async function fleet(db: Db) {
  const tz = sql.raw(`(array[${TIMEZONES.map((t) => `'${t}'`).join(',')}])`);
  await db.execute(sql`insert into sites (name, timezone, latitude, longitude, elevation_m, supply_flow_lpm, static_pressure_kpa)
    select 'Bench site ' || i, ${tz}[1 + i % ${TIMEZONES.length}], 35 + (i % 15), -100 + (i % 40), 200, 120, 400 from generate_series(1, ${SITES}) i`);
  await db.execute(sql`insert into controllers (serial, name, site_id, relay_count, has_flow_sensor, online)
    select 'HIST-' || lpad(s.id::text, 5, '0'), 'Board ' || s.id, s.id, 8, s.id % 2 = 0, true from sites s`);
  await db.execute(sql`insert into zones (controller_id, relay, name, plant_type, soil_texture, head_type, head_count, flow_per_head_lpm, area_m2, root_depth_m, efficiency)
    select c.id, k, 'Zone ' || k, (array['cool_season_turf','warm_season_turf','shrubs','trees','groundcover','vegetables'])[k]::plant_type, 'loam',
      case when k <= 3 then 'spray' else 'drip' end::head_type, 6 + k, case when k <= 3 then 5 else 0.5 end, 80 + 20 * k, 0.2, 0.75
    from controllers c cross join generate_series(1, ${ZONES_PER_SITE}) k`);
  await db.execute(sql`insert into programs (site_id, name, start_times, day_rule, crons)
    select id, 'Daily', '["05:00"]', '{"kind":"weekdays","weekdays":[0,1,2,3,4,5,6]}', '["0 5 * * 0,1,2,3,4,5,6"]' from sites`);
}

async function zoneRunsYear(db: Db, from: string, todayUtc: string) {
  await db.execute(sql`insert into runs (site_id, program_id, kind, scheduled_for, state, ended_at)
    select p.site_id, p.id, 'program', d + interval '11 hours', 'completed', d + interval '13 hours'
    from programs p cross join generate_series(${from}::timestamptz, ${todayUtc}::timestamptz, interval '1 day') d`);
  // One zone run per zone and run; the state drawn from a hash of the ids so runs differ but the load is repeatable.
  await db.execute(sql`insert into zone_runs (run_id, site_id, zone_id, controller_id, position, cycle, planned_start, planned_end, planned_minutes,
      actual_start, actual_end, actual_minutes, estimated_litres, measured_litres, state, reason)
    select r.id, r.site_id, z.id, c.id, z.relay, 0, t.ps, t.ps + make_interval(secs => t.m * 60), t.m,
      case when t.st in ('completed', 'stopped') then t.ps end,
      case when t.st in ('completed', 'stopped') then t.ps + make_interval(secs => t.am * 60) end,
      case when t.st in ('completed', 'stopped') then t.am end,
      case when t.st in ('completed', 'stopped') then round((t.am * z.head_count * z.flow_per_head_lpm)::numeric, 1) else 0 end,
      case when t.st in ('completed', 'stopped') and c.has_flow_sensor then round((t.am * z.head_count * z.flow_per_head_lpm * (0.9 + 0.2 * t.h))::numeric, 1) end,
      t.st::zone_run_state,
      case t.st when 'held_rain' then 'Held by rain: the rain sensor is wet' when 'skipped_restriction' then 'No watering on Wednesdays at this site'
        when 'failed' then 'no acknowledgement after 3 tries' when 'stopped' then 'Stopped by a user' end
    from runs r
    join controllers c on c.site_id = r.site_id
    join zones z on z.controller_id = c.id
    cross join lateral (
      select h, ps, m, case when st = 'stopped' then m * 0.4 else m end as am, st
      from (select (abs(hashtext(r.id::text || ':' || z.id::text)) % 1000) / 1000.0 as h,
                   r.scheduled_for + make_interval(mins => (z.relay - 1) * 15) as ps, (8 + z.relay * 2)::float8 as m) a
      cross join lateral (select case when h < 0.08 then 'held_rain' when h < 0.13 then 'skipped_restriction' when h < 0.14 then 'failed'
                                      when h < 0.15 then 'stopped' else 'completed' end as st) b
    ) t`);
}

async function weatherYear(db: Db, from: string, todayUtc: string) {
  await db.execute(sql`insert into weather_days (site_id, date, tmax_c, tmin_c, rain_mm, et0_mm, et0_method, source)
    select s.id, d::date, 24 + 8 * sin(extract(doy from d) / 58.0), 10 + 6 * sin(extract(doy from d) / 58.0),
      case when (abs(hashtext(s.id::text || d::text)) % 10) = 0 then 12 else 0 end, 2 + 3 * (1 + sin(extract(doy from d) / 58.0)), 'bench', 'service'
    from sites s cross join generate_series(${from}::date, ${todayUtc}::date, interval '1 day') d`);
}

async function readingsYear(db: Db, from: string, todayUtc: string) {
  // Readings: build the indexes after the rows, as a bulk load does.
  await db.execute(sql`drop index if exists readings_controller_at_idx`);
  await db.execute(sql`drop index if exists readings_at_brin`);
  await db.execute(sql`insert into readings (controller_id, at, board_at, received_at, seq, rain, moisture_raw, moisture_pct, supply_v, flow_lpm, rssi)
    select c.id, t, t, t, (extract(epoch from t))::bigint, false, 2200, 25 + 10 * sin(extract(epoch from t) / 86400.0), 24.5,
      case when c.has_flow_sensor then 0 end, -62
    from controllers c cross join generate_series(${from}::timestamptz, ${todayUtc}::timestamptz + interval '1 day', ${READING_EVERY}::interval) t`);
  await db.execute(sql`create index readings_controller_at_idx on readings using btree (controller_id, at)`);
  await db.execute(sql`create index readings_at_brin on readings using brin (at)`);
}

/** A connection of its own for one part of the load; foreign-key triggers off where the role may do so (a bulk load of consistent rows). */
async function loader(pool: pg.Pool): Promise<{ db: Db; release: () => void }> {
  const c = await pool.connect();
  await c.query('set session_replication_role = replica').catch(() => {});
  return { db: drizzle(c, { casing: 'snake_case' }) as unknown as Db, release: () => c.release() };
}

export async function loadHistoryYear(pool: pg.Pool, todayUtc: string) {
  const from = DateTime.fromISO(todayUtc, { zone: 'UTC' }).minus({ days: 364 }).toISODate()!;
  const t0 = performance.now();
  const a = await loader(pool);
  const b = await loader(pool);
  try {
    await fleet(a.db);
    // Zone runs and rollups on one connection, readings on the other: two cores, two loads.
    const [tRuns, tReadings] = await Promise.all([
      (async () => {
        await zoneRunsYear(a.db, from, todayUtc);
        await weatherYear(a.db, from, todayUtc);
        const t = performance.now();
        await rebuildRollups(a.db, { from: DateTime.fromISO(from).minus({ days: 1 }).toISODate()!, to: DateTime.fromISO(todayUtc).plus({ days: 1 }).toISODate()! });
        return [t - t0, performance.now() - t] as const;
      })(),
      (async () => {
        await readingsYear(b.db, from, todayUtc);
        const t = performance.now();
        await b.db.execute(sql`set work_mem = '256MB'`);
        await recomputeHours(b.db, null, Date.parse(`${from}T00:00:00Z`), Date.parse(`${todayUtc}T00:00:00Z`) + 2 * 86_400_000);
        return [t - t0, performance.now() - t] as const;
      })(),
    ]);
    await a.db.execute(sql`analyze`);
    const counts = (await a.db.execute<{ zr: number; rd: number; wu: number }>(sql`
      select (select count(*) from zone_runs)::int as zr, (select count(*) from readings)::int as rd, (select count(*) from water_use_daily)::int as wu`)).rows[0];
    log(`loaded ${counts.zr} zone runs, ${counts.rd} readings, ${counts.wu} daily rollup rows in ${round((performance.now() - t0) / 1000)} s ` +
      `(zone runs + weather ${round(tRuns[0] / 1000)} s then rollups ${round(tRuns[1] / 1000)} s; alongside, readings ${round(tReadings[0] / 1000)} s then hourly rollups ${round(tReadings[1] / 1000)} s)`);
  } finally {
    a.release();
    b.release();
  }
}

async function timed(n: number, fn: (i: number) => Promise<unknown>): Promise<number[]> {
  for (let i = 0; i < 5; i++) await fn(i); // warm the caches and the query plans
  const out: number[] = [];
  for (let i = 0; i < n; i++) {
    const t = performance.now();
    await fn(i);
    out.push(performance.now() - t);
  }
  return out;
}

/**
 * The history benchmark: builds a fresh database (BENCH_ADMIN_DATABASE_URL or
 * TEST_ADMIN_DATABASE_URL, as every benchmark), loads a year for 200 sites, then times the
 * services the API calls:
 *   run history — one page (25 rows + the count) of a site's last 90 days, an owner's two sites
 *                 over 30 days, or every site's last 7 days, in turn;
 *   daily water use — a site's last 365 days by day, every zone and the site, with demand and rain.
 */
export async function benchHistory(opts: { iterations?: number } = {}): Promise<HistoryBenchResult> {
  const n = opts.iterations ?? 50;
  const bdb = await benchDb('history');
  try {
    const db = bdb.db;
    const today = DateTime.utc().toISODate()!;
    await loadHistoryYear(bdb.pool, today);
    const admin: Actor = { userId: 0, email: 'bench', name: 'Bench', role: 'admin', siteIds: 'all' };
    const owner: Actor = { userId: 0, email: 'owner', name: 'Owner', role: 'owner', siteIds: new Set([17, 18]) };
    const daysAgo = (d: number) => DateTime.fromISO(today).minus({ days: d }).toISODate()!;
    const site = (i: number) => 1 + ((i * 37) % SITES);
    const pages = [
      (i: number) => listRunHistory({ db, actor: admin }, runHistoryQuerySchema.parse({ siteId: site(i), from: daysAgo(90), to: today, page: 1 + (i % 4) })),
      (i: number) => listRunHistory({ db, actor: owner }, runHistoryQuerySchema.parse({ from: daysAgo(30), to: today, page: 1 + (i % 3), state: i % 2 ? 'held_rain,skipped_restriction,failed,stopped' : undefined })),
      (i: number) => listRunHistory({ db, actor: admin }, runHistoryQuerySchema.parse({ from: daysAgo(7), to: today, page: 1 + (i % 5) })),
    ];
    const history = await timed(n, (i) => pages[i % pages.length](i));
    const perKind = pages.map((_, k) => round(percentile(history.filter((_, i) => i % pages.length === k), 95)));
    const water = await timed(n, (i) => siteWaterUse({ db, actor: admin, now: Date.now() }, waterUseQuerySchema.parse({ siteId: site(i), from: daysAgo(364), to: today, bucket: 'day' })));
    const year = { from: `${daysAgo(364)}T00:00:00Z`, to: `${today}T23:59:59Z`, points: 500 };
    const readings = await timed(10, (i) => controllerReadings({ db, actor: admin, now: Date.now() }, site(i), year));
    log(`sensor history, a year of one controller (about 35,000 readings) in 500 buckets: p95 ${round(percentile(readings, 95))} ms`);
    const result: HistoryBenchResult = { sites: SITES, runHistoryP95Ms: round(percentile(history, 95)), dailyWaterUseP95Ms: round(percentile(water, 95)) };
    log(`run history p95 ${result.runHistoryP95Ms} ms (site 90 days ${perKind[0]}, owner 30 days ${perKind[1]}, fleet 7 days ${perKind[2]}); daily water use (365 days) p95 ${result.dailyWaterUseP95Ms} ms`);
    return result;
  } finally {
    await bdb.drop();
  }
}

// Run on its own: node --import tsx bench/history.ts
if (import.meta.url === `file://${process.argv[1]}`) {
  console.log(JSON.stringify(await benchHistory()));
  process.exit(0);
}
