import { sql, type SQL } from 'drizzle-orm';
import { stringify } from 'csv-stringify';
import { DateTime } from 'luxon';
import type { Writable } from 'node:stream';
import { finished } from 'node:stream/promises';
import type { Db } from '../db/client';
import type { Actor } from '../services/actor';
import { loadVisibleSite } from '../services/sites';
import { loadVisibleZone } from '../services/zones';
import type { RunHistoryFilter, RunHistoryPage, RunHistoryQuery, RunHistoryRow } from '../contracts/history';
import { and, inList, iso, numOrNull, siteScope } from './sql';

type Ctx = { db: Db; actor: Actor };

/** Counting stops here: a page never pays for counting a whole fleet's years. */
export const COUNT_CAP = 10_000;
/** Most rows one CSV export holds. */
export const CSV_MAX_ROWS = 100_000;

const isDate = (s: string) => /^\d{4}-\d{2}-\d{2}$/.test(s);

/**
 * How a filter is run. Zone runs are read site by site (a LATERAL join per site, through the
 * (site, planned start) index), each site giving only its first `offset + limit` rows, then
 * merged; a fleet-wide page costs one short index range scan per site. Dates are local days at
 * each site, so sites are taken in groups of one timezone, where a local day is one constant
 * UTC range the planner can estimate.
 */
type Plan = { f: RunHistoryFilter; sites: SQL; filters: SQL; zones: { tz: string | null; time: SQL }[] };

async function planOf(ctx: Ctx, f: RunHistoryFilter): Promise<Plan> {
  if (f.siteId !== undefined) await loadVisibleSite(ctx, f.siteId);
  if (f.zoneId !== undefined) await loadVisibleZone(ctx, f.zoneId);
  const sites = and([f.siteId !== undefined ? sql`s.id = ${f.siteId}` : undefined, siteScope(sql`s.id`, ctx.actor)]);
  const filters = and([
    f.zoneId !== undefined ? sql`zr.zone_id = ${f.zoneId}` : undefined,
    f.programId === 'manual' ? sql`r.program_id is null` : f.programId !== undefined ? sql`r.program_id = ${f.programId}` : undefined,
    f.state ? inList(sql`zr.state::text`, f.state) : undefined,
  ]);
  const byDate = (f.from && isDate(f.from)) || (f.to && isDate(f.to));
  const tzs = byDate
    ? (await ctx.db.execute<{ timezone: string }>(sql`select distinct s.timezone from sites s where ${sites} order by 1`)).rows.map((r) => r.timezone)
    : [null];
  const zones = tzs.map((tz) => {
    const lo = f.from ? (isDate(f.from) ? DateTime.fromISO(f.from, { zone: tz! }).startOf('day').toJSDate() : new Date(f.from)) : null;
    const hi = f.to ? (isDate(f.to) ? DateTime.fromISO(f.to, { zone: tz! }).startOf('day').plus({ days: 1 }).toJSDate() : new Date(f.to)) : null;
    return { tz, time: and([lo ? sql`zr.planned_start >= ${lo}` : undefined, hi ? sql`zr.planned_start < ${hi}` : undefined]) };
  });
  return { f, sites, filters, zones };
}

const needsRun = (f: RunHistoryFilter) => f.programId !== undefined;

/** Sort key over the inner tables (zr, z, s) or over the merged rows (u). */
function sortKey(f: RunHistoryFilter, side: 'inner' | 'merged'): SQL {
  const inner = side === 'inner';
  switch (f.sort) {
    case 'plannedStart':
      return inner ? sql`zr.planned_start` : sql`u.planned_start`;
    case 'zone':
      return inner ? sql`z.name` : sql`u.zone_name`;
    case 'site':
      return inner ? sql`s.name` : sql`u.site_name`;
    case 'state':
      return inner ? sql`zr.state::text` : sql`u.state::text`;
    case 'plannedMinutes':
      return inner ? sql`zr.planned_minutes` : sql`u.planned_minutes`;
    case 'actualMinutes':
      return inner ? sql`coalesce(zr.actual_minutes, 0)` : sql`coalesce(u.actual_minutes, 0)`;
    case 'litres':
      return inner ? sql`coalesce(zr.measured_litres, zr.estimated_litres, 0)` : sql`coalesce(u.measured_litres, u.estimated_litres, 0)`;
  }
}

function orderBy(f: RunHistoryFilter, side: 'inner' | 'merged'): SQL {
  const dir = sql.raw(f.order === 'asc' ? 'asc' : 'desc');
  const t = sql.raw(side === 'inner' ? 'zr' : 'u');
  return sql`order by ${sortKey(f, side)} ${dir}, ${t}.planned_start ${dir}, ${t}.id ${dir}`;
}

/** One timezone group: each of its sites' first `take` rows. */
function branch(p: Plan, z: Plan['zones'][number], take: number): SQL {
  const f = p.f;
  return sql`select h.*, s.name as site_name, s.timezone from sites s
    cross join lateral (
      select zr.id, zr.run_id, zr.site_id, zr.zone_id, zr.controller_id, zr.cycle, zr.planned_start, zr.planned_end, zr.planned_minutes,
        zr.actual_start, zr.actual_end, zr.actual_minutes, zr.estimated_litres, zr.measured_litres, zr.state, zr.reason
        ${f.sort === 'zone' ? sql`, z.name as zone_name` : sql``}
      from zone_runs zr
        ${needsRun(f) ? sql`join runs r on r.id = zr.run_id` : sql``}
        ${f.sort === 'zone' ? sql`join zones z on z.id = zr.zone_id` : sql``}
      where zr.site_id = s.id and ${p.filters} and ${z.time}
      ${orderBy(f, 'inner')} limit ${take}
    ) h
    where ${p.sites} ${z.tz === null ? sql`` : sql`and s.timezone = ${z.tz}`}`;
}

/** Rows offset … offset + limit, with their run, zone and program names joined on last. */
function pageQuery(p: Plan, limit: number, offset: number): SQL {
  const merged = sql.join(p.zones.map((z) => sql`(${branch(p, z, offset + limit)})`), sql` union all `);
  return sql`select u.*, r.program_id, r.kind as run_kind, z.name as zone_name, p.name as program_name,
      to_char((u.planned_start at time zone u.timezone)::date, 'YYYY-MM-DD') as local_date
    from (select * from (${merged}) u ${orderBy(p.f, 'merged')} limit ${limit} offset ${offset}) u
    join runs r on r.id = u.run_id
    join zones z on z.id = u.zone_id
    left join programs p on p.id = r.program_id
    ${orderBy(p.f, 'merged')}`;
}

function countQuery(p: Plan): SQL {
  const parts = p.zones.map(
    (z) => sql`(select 1 from sites s cross join lateral (
      select 1 from zone_runs zr ${needsRun(p.f) ? sql`join runs r on r.id = zr.run_id` : sql``}
      where zr.site_id = s.id and ${p.filters} and ${z.time} limit ${COUNT_CAP + 1}
    ) c where ${p.sites} ${z.tz === null ? sql`` : sql`and s.timezone = ${z.tz}`})`,
  );
  return sql`select count(*)::int as n from (select 1 from (${sql.join(parts, sql` union all `)}) c limit ${COUNT_CAP + 1}) t`;
}

type Raw = Record<string, unknown>;

function rowOf(r: Raw): RunHistoryRow {
  const measured = numOrNull(r.measured_litres);
  const estimated = numOrNull(r.estimated_litres);
  return {
    id: Number(r.id),
    runId: Number(r.run_id),
    siteId: Number(r.site_id),
    siteName: String(r.site_name),
    zoneId: Number(r.zone_id),
    zoneName: String(r.zone_name),
    controllerId: Number(r.controller_id),
    programId: numOrNull(r.program_id),
    programName: (r.program_name as string | null) ?? null,
    runKind: String(r.run_kind),
    cycle: Number(r.cycle),
    localDate: String(r.local_date),
    plannedStart: iso(r.planned_start as string)!,
    plannedEnd: iso(r.planned_end as string)!,
    plannedMinutes: Number(r.planned_minutes),
    actualStart: iso(r.actual_start as string | null),
    actualEnd: iso(r.actual_end as string | null),
    actualMinutes: numOrNull(r.actual_minutes),
    litres: measured ?? estimated ?? 0,
    litresBasis: measured !== null ? 'measured' : 'estimated',
    measuredLitres: measured,
    estimatedLitres: estimated,
    state: r.state as RunHistoryRow['state'],
    reason: (r.reason as string | null) ?? null,
  };
}

/** One page of zone runs, filtered, sorted and counted on the server. */
export async function listRunHistory(ctx: Ctx, q: RunHistoryQuery): Promise<RunHistoryPage> {
  const p = await planOf(ctx, q);
  const [rows, count] = await Promise.all([
    ctx.db.execute<Raw>(pageQuery(p, q.pageSize, (q.page - 1) * q.pageSize)),
    ctx.db.execute<{ n: number }>(countQuery(p)),
  ]);
  const n = count.rows[0]?.n ?? 0;
  return {
    items: rows.rows.map(rowOf),
    page: q.page,
    pageSize: q.pageSize,
    total: Math.min(n, COUNT_CAP),
    totalIsExact: n <= COUNT_CAP,
    sort: q.sort,
    order: q.order,
  };
}

export const CSV_COLUMNS = [
  'zone_run_id', 'run_id', 'site', 'zone', 'program', 'run_kind', 'cycle', 'local_date', 'planned_start', 'planned_minutes',
  'actual_start', 'actual_end', 'actual_minutes', 'litres', 'litres_basis', 'state', 'reason',
] as const;

const csvRecord = (r: RunHistoryRow) => [
  r.id, r.runId, r.siteName, r.zoneName, r.programName ?? (r.runKind === 'program' ? '' : r.runKind), r.runKind, r.cycle, r.localDate,
  r.plannedStart, r.plannedMinutes, r.actualStart ?? '', r.actualEnd ?? '', r.actualMinutes ?? '', r.litres, r.litresBasis, r.state, r.reason ?? '',
];

/**
 * Every row of a filter (up to CSV_MAX_ROWS) as CSV, in the page's order, streamed in chunks
 * so memory stays flat. The scope and filter checks run before anything is written.
 */
export async function prepareRunHistoryCsv(ctx: Ctx, f: RunHistoryFilter): Promise<(out: Writable) => Promise<void>> {
  const p = await planOf(ctx, f);
  return async (out) => {
    const csv = stringify({ header: true, columns: [...CSV_COLUMNS] });
    csv.pipe(out);
    const write = (rec: unknown[]) =>
      csv.write(rec) ? Promise.resolve() : new Promise<void>((ok) => csv.once('drain', () => ok()));
    const chunk = 5000;
    for (let offset = 0; offset < CSV_MAX_ROWS; offset += chunk) {
      const rows = await ctx.db.execute<Raw>(pageQuery(p, Math.min(chunk, CSV_MAX_ROWS - offset), offset));
      for (const r of rows.rows) await write(csvRecord(rowOf(r)));
      if (rows.rows.length < chunk) break;
    }
    csv.end();
    await finished(out).catch(() => {}); // a client that hangs up early is not an error
  };
}
