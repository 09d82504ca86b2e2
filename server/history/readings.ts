import { sql, type SQL } from 'drizzle-orm';
import type { Db } from '../db/client';
import { badRequest } from '../errors';
import type { Actor } from '../services/actor';
import { loadVisibleController } from '../services/controllers';
import type { ReadingBucket, ReadingsResponse, ValveMark } from '../contracts/history';
import { HOUR_MS, hourOf } from './readings-rollup';
import { iso, numOrNull, round } from './sql';

type Ctx = { db: Db; actor: Actor; now: number };

/** Longest range one request may ask for. */
export const MAX_RANGE_MS = 2 * 366 * 86_400_000;
export const MAX_VALVE_MARKS = 5000;

/**
 * A controller's sensor history over [from, to), cut into about `points` equal time buckets,
 * each with the mean, lowest and highest moisture, supply voltage and flow, so a year of
 * readings comes back as a few hundred points. Buckets of an hour or more are read from the
 * hourly rollup (readings_hourly) for whole hours, so a year costs 8,760 rows, not every
 * reading. Valve open/close marks for the same range.
 */
export async function controllerReadings(ctx: Ctx, controllerId: number, q: { from?: string; to?: string; points: number }): Promise<ReadingsResponse> {
  const c = await loadVisibleController(ctx, controllerId);
  const to = q.to ? Date.parse(q.to) : ctx.now;
  const from = q.from ? Date.parse(q.from) : to - 86_400_000;
  if (!(from < to)) throw badRequest('“from” must be before “to”');
  if (to - from > MAX_RANGE_MS) throw badRequest('At most two years of readings at a time');
  // Whole seconds, so bucket starts are tidy; never below one second. Past an hour a bucket is
  // whole hours, aligned to the hour, and whole hours are read from the hourly rollup.
  let bucketMs = Math.max(1000, Math.ceil((to - from) / q.points / 1000) * 1000);
  let base = from;
  let rolled: { from: number; to: number } | null = null;
  if (bucketMs >= HOUR_MS) {
    bucketMs = Math.ceil(bucketMs / HOUR_MS) * HOUR_MS;
    base = hourOf(from);
    const lo = hourOf(from + HOUR_MS - 1);
    // The last two hours come from the readings themselves: the rollup may not have caught up.
    const hi = Math.min(hourOf(to), hourOf(ctx.now) - HOUR_MS);
    if (hi > lo) rolled = { from: lo, to: hi };
  }
  const fromD = new Date(from);
  const toD = new Date(to);
  const bucket = (col: SQL) => sql`date_bin(${`${bucketMs} milliseconds`}::interval, ${col}, ${new Date(base)})`;
  const rawRange = rolled
    ? sql`((at >= ${fromD} and at < ${new Date(rolled.from)}) or (at >= ${new Date(rolled.to)} and at < ${toD}))`
    : sql`at >= ${fromD} and at < ${toD}`;
  const parts = [
    sql`select ${bucket(sql`at`)} as b, 1 as n, moisture_pct::float8 as m_sum, moisture_pct as m_min, moisture_pct as m_max,
        supply_v::float8 as v_sum, supply_v as v_min, supply_v as v_max,
        (flow_lpm is not null)::int as f_n, flow_lpm::float8 as f_sum, flow_lpm as f_min, flow_lpm as f_max
      from readings where controller_id = ${c.id} and ${rawRange}`,
  ];
  if (rolled) {
    parts.push(sql`select ${bucket(sql`hour`)}, n, moisture_sum, moisture_min, moisture_max, supply_sum, supply_min, supply_max, flow_n, flow_sum, flow_min, flow_max
      from readings_hourly where controller_id = ${c.id} and hour >= ${new Date(rolled.from)} and hour < ${new Date(rolled.to)}`);
  }
  const [rows, marks] = await Promise.all([
    ctx.db.execute<Record<string, unknown>>(sql`
      select b, sum(n)::int as n, sum(m_sum) / sum(n) as m_avg, min(m_min) as m_min, max(m_max) as m_max,
        sum(v_sum) / sum(n) as v_avg, min(v_min) as v_min, max(v_max) as v_max,
        case when sum(f_n) > 0 then sum(f_sum) / sum(f_n) end as f_avg, min(f_min) as f_min, max(f_max) as f_max
      from (${sql.join(parts, sql` union all `)}) x
      group by b order by b`),
    ctx.db.execute<Record<string, unknown>>(sql`
      select at, relay, zone_id, open, source from valve_events
      where controller_id = ${c.id} and at >= ${fromD} and at < ${toD}
      order by at, id limit ${MAX_VALVE_MARKS + 1}`),
  ]);
  const series: ReadingBucket[] = rows.rows.map((r) => {
    const f = (k: string, d = 2) => (r[k] === null || r[k] === undefined ? null : round(Number(r[k]), d));
    return {
      at: iso(r.b as string)!,
      n: Number(r.n),
      moistureAvg: f('m_avg', 1)!,
      moistureMin: f('m_min', 1)!,
      moistureMax: f('m_max', 1)!,
      supplyVAvg: f('v_avg')!,
      supplyVMin: f('v_min')!,
      supplyVMax: f('v_max')!,
      flowAvg: f('f_avg'),
      flowMin: f('f_min'),
      flowMax: f('f_max'),
    };
  });
  const valveEvents: ValveMark[] = marks.rows.slice(0, MAX_VALVE_MARKS).map((m) => ({
    at: iso(m.at as Date)!,
    relay: Number(m.relay),
    zoneId: numOrNull(m.zone_id),
    open: Boolean(m.open),
    source: String(m.source),
  }));
  return {
    controllerId: c.id,
    from: fromD.toISOString(),
    to: toD.toISOString(),
    bucketMs,
    series,
    valveEvents,
    valveEventsTruncated: marks.rows.length > MAX_VALVE_MARKS,
  };
}
