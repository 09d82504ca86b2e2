import { sql, type SQL } from 'drizzle-orm';
import { stringify } from 'csv-stringify';
import type { Writable } from 'node:stream';
import { finished } from 'node:stream/promises';
import type { Db } from '../db/client';
import type { Actor } from '../services/actor';
import { loadVisibleSite } from '../services/sites';
import { loadVisibleZone } from '../services/zones';
import type { RunHistoryFilter, RunHistoryPage, RunHistoryQuery, RunHistoryRow } from '../contracts/history';
import { addDays, and, inList, iso, numOrNull, siteScope } from './sql';

type Ctx = { db: Db; actor: Actor };

/** Counting stops here: a page never pays for counting a whole fleet's years. */
export const COUNT_CAP = 10_000;
/** Most rows one CSV export holds. */
export const CSV_MAX_ROWS = 100_000;

const isDate = (s: string) => /^\d{4}-\d{2}-\d{2}$/.test(s);
const localDay = sql`(zr.planned_start at time zone s.timezone)::date`;

/** The WHERE clause of a filter, after checking the person may see the site and zone named. */
async function whereOf(ctx: Ctx, f: RunHistoryFilter): Promise<SQL> {
  if (f.siteId !== undefined) await loadVisibleSite(ctx, f.siteId);
  if (f.zoneId !== undefined) await loadVisibleZone(ctx, f.zoneId);
  const parts: (SQL | undefined)[] = [siteScope(sql`zr.site_id`, ctx.actor)];
  if (f.siteId !== undefined) parts.push(sql`zr.site_id = ${f.siteId}`);
  if (f.zoneId !== undefined) parts.push(sql`zr.zone_id = ${f.zoneId}`);
  if (f.programId === 'manual') parts.push(sql`r.program_id is null`);
  else if (f.programId !== undefined) parts.push(sql`r.program_id = ${f.programId}`);
  if (f.state) parts.push(inList(sql`zr.state::text`, f.state));
  if (f.from) {
    if (isDate(f.from)) {
      // A coarse bound on the indexed column, then the exact local day at each run's site.
      parts.push(sql`zr.planned_start >= ${new Date(`${addDays(f.from, -1)}T00:00:00Z`)}`, sql`${localDay} >= ${f.from}::date`);
    } else parts.push(sql`zr.planned_start >= ${new Date(f.from)}`);
  }
  if (f.to) {
    if (isDate(f.to)) {
      parts.push(sql`zr.planned_start < ${new Date(`${addDays(f.to, 2)}T00:00:00Z`)}`, sql`${localDay} <= ${f.to}::date`);
    } else parts.push(sql`zr.planned_start < ${new Date(f.to)}`);
  }
  return and(parts);
}

const from = sql`from zone_runs zr
  join runs r on r.id = zr.run_id
  join zones z on z.id = zr.zone_id
  join sites s on s.id = zr.site_id
  left join programs p on p.id = r.program_id`;

const SORTS: Record<RunHistoryFilter['sort'], SQL> = {
  plannedStart: sql`zr.planned_start`,
  zone: sql`z.name`,
  site: sql`s.name`,
  state: sql`zr.state::text`,
  plannedMinutes: sql`zr.planned_minutes`,
  actualMinutes: sql`coalesce(zr.actual_minutes, 0)`,
  litres: sql`coalesce(zr.measured_litres, zr.estimated_litres, 0)`,
};

function orderBy(f: RunHistoryFilter): SQL {
  const dir = sql.raw(f.order === 'asc' ? 'asc' : 'desc');
  return sql`order by ${SORTS[f.sort]} ${dir}, zr.planned_start ${dir}, zr.id ${dir}`;
}

const select = sql`select zr.id, zr.run_id, zr.site_id, s.name as site_name, zr.zone_id, z.name as zone_name, zr.controller_id,
  r.program_id, p.name as program_name, r.kind as run_kind, zr.cycle,
  to_char(${localDay}, 'YYYY-MM-DD') as local_date,
  zr.planned_start, zr.planned_end, zr.planned_minutes, zr.actual_start, zr.actual_end, zr.actual_minutes,
  zr.estimated_litres, zr.measured_litres, zr.state, zr.reason`;

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
    plannedStart: iso(r.planned_start as Date)!,
    plannedEnd: iso(r.planned_end as Date)!,
    plannedMinutes: Number(r.planned_minutes),
    actualStart: iso(r.actual_start as Date | null),
    actualEnd: iso(r.actual_end as Date | null),
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
  const where = await whereOf(ctx, q);
  const offset = (q.page - 1) * q.pageSize;
  const [rows, count] = await Promise.all([
    ctx.db.execute<Raw>(sql`${select} ${from} where ${where} ${orderBy(q)} limit ${q.pageSize} offset ${offset}`),
    ctx.db.execute<{ n: number }>(sql`select count(*)::int as n from (select 1 ${from} where ${where} limit ${COUNT_CAP + 1}) t`),
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
  const where = await whereOf(ctx, f);
  return async (out) => {
    const csv = stringify({ header: true, columns: [...CSV_COLUMNS] });
    csv.pipe(out);
    const write = (rec: unknown[]) =>
      csv.write(rec) ? Promise.resolve() : new Promise<void>((ok) => csv.once('drain', () => ok()));
    const chunk = 2000;
    for (let offset = 0; offset < CSV_MAX_ROWS; offset += chunk) {
      const rows = await ctx.db.execute<Raw>(sql`${select} ${from} where ${where} ${orderBy(f)} limit ${Math.min(chunk, CSV_MAX_ROWS - offset)} offset ${offset}`);
      for (const r of rows.rows) await write(csvRecord(rowOf(r)));
      if (rows.rows.length < chunk) break;
    }
    csv.end();
    await finished(out).catch(() => {}); // a client that hangs up early is not an error
  };
}
