import { sql, type SQL } from 'drizzle-orm';
import type { Logger } from 'pino';
import type { Clock } from '../clock';
import type { Db } from '../db/client';
import type { LiveBus } from '../live/bus';
import { notAsPlannedStates } from '../contracts/history';
import { addDays, dayBounds, inList, todayAt } from './sql';

const NOT_AS_PLANNED = sql.raw(notAsPlannedStates.map((s) => `'${s}'`).join(', '));

/** The aggregate of zone runs into one water_use_daily row; `dateExpr` names the local day. */
const aggregate = (dateExpr: SQL) => sql`
  select zr.zone_id, ${dateExpr} as date, zr.site_id,
    (count(*) filter (where coalesce(zr.actual_minutes, 0) > 0 or zr.measured_litres is not null))::int,
    coalesce(sum(zr.actual_minutes), 0),
    coalesce(sum(coalesce(zr.measured_litres, zr.estimated_litres, 0)), 0),
    coalesce(sum(zr.measured_litres), 0),
    coalesce(sum(coalesce(zr.estimated_litres, 0)) filter (where zr.measured_litres is null), 0),
    (count(*) filter (where zr.measured_litres is not null))::int,
    (count(*) filter (where zr.state in (${NOT_AS_PLANNED})))::int,
    now()`;

const columns = sql`(zone_id, date, site_id, runs, minutes, litres, measured_litres, estimated_litres, measured_runs, not_as_planned, updated_at)`;
const onConflict = sql`on conflict (zone_id, date) do update set site_id = excluded.site_id, runs = excluded.runs, minutes = excluded.minutes,
  litres = excluded.litres, measured_litres = excluded.measured_litres, estimated_litres = excluded.estimated_litres,
  measured_runs = excluded.measured_runs, not_as_planned = excluded.not_as_planned, updated_at = excluded.updated_at`;

/** Recompute one zone's day from its zone runs (the day = local date of the planned start at the site). */
export async function recomputeZoneDay(db: Db, zoneId: number, date: string, timezone: string): Promise<void> {
  const { start, end } = dayBounds(date, timezone);
  await db.transaction(async (tx) => {
    await tx.execute(sql`delete from water_use_daily where zone_id = ${zoneId} and date = ${date}`);
    await tx.execute(sql`insert into water_use_daily ${columns}
      ${aggregate(sql`${date}::date`)}
      from zone_runs zr
      where zr.zone_id = ${zoneId} and zr.planned_start >= ${start} and zr.planned_start < ${end}
      group by zr.zone_id, zr.site_id
      ${onConflict}`);
  });
}

/** Rebuild every zone's days in [from, to] (local dates), for some sites or all. Backfills and repairs. */
export async function rebuildRollups(db: Db, opts: { from: string; to: string; siteIds?: number[] }): Promise<void> {
  const coarseFrom = new Date(`${addDays(opts.from, -1)}T00:00:00Z`);
  const coarseTo = new Date(`${addDays(opts.to, 2)}T00:00:00Z`);
  const siteCond = opts.siteIds ? inList(sql`zr.site_id`, opts.siteIds) : sql`true`;
  const local = sql`(zr.planned_start at time zone s.timezone)::date`;
  await db.transaction(async (tx) => {
    await tx.execute(sql`delete from water_use_daily w where w.date between ${opts.from}::date and ${opts.to}::date
      and ${opts.siteIds ? inList(sql`w.site_id`, opts.siteIds) : sql`true`}`);
    await tx.execute(sql`insert into water_use_daily ${columns}
      ${aggregate(local)}
      from zone_runs zr join sites s on s.id = zr.site_id
      where zr.planned_start >= ${coarseFrom} and zr.planned_start < ${coarseTo} and ${siteCond}
        and ${local} between ${opts.from}::date and ${opts.to}::date
      group by zr.zone_id, ${local}, zr.site_id
      ${onConflict}`);
  });
}

const FINAL = new Set(['completed', 'stopped', 'held_rain', 'skipped_restriction', 'skipped_not_needed', 'failed']);
/** States a whole run ends in ('run' events); a run held or skipped at planning writes its zone runs final at once. */
const RUN_ENDED = new Set(['completed', 'partial', 'held_rain', 'skipped_restriction', 'failed', 'cancelled']);

/**
 * Keeps water_use_daily current: each time a zone run ends (the executor's 'zone_run' event),
 * its zone's day is recomputed from the zone runs; when a whole run ends (its 'run' event), every
 * zone day it touched is, which covers zone runs written already held or skipped when the run was
 * planned (no 'zone_run' event for those). Work is done one at a time, in order.
 */
export class RollupKeeper {
  private chain: Promise<void> = Promise.resolve();
  private unsubscribe: (() => void) | null = null;
  readonly stats = { recomputed: 0, failed: 0 };

  constructor(private d: { db: Db; bus: LiveBus; clock: Clock; log: Logger }) {}

  start(): void {
    this.unsubscribe = this.d.bus.subscribe((e) => {
      if (e.type === 'run' && typeof e.runId === 'number' && typeof e.state === 'string' && RUN_ENDED.has(e.state)) {
        const runId = e.runId;
        this.enqueue(() => this.runEnded(runId));
        return;
      }
      if (e.type !== 'zone_run' || typeof e.zoneRunId !== 'number') return;
      if (typeof e.state === 'string' && !FINAL.has(e.state)) return;
      this.enqueue(() => this.zoneRunEnded(e.zoneRunId as number));
    });
    // Catch up on runs that ended while no server was listening (yesterday and today, every site).
    const today = todayAt(this.d.clock.now(), 'UTC');
    this.enqueue(() => rebuildRollups(this.d.db, { from: addDays(today, -2), to: addDays(today, 1) }));
  }

  private enqueue(job: () => Promise<void>) {
    this.chain = this.chain.then(job).then(
      () => void this.stats.recomputed++,
      (err) => {
        this.stats.failed++;
        this.d.log.warn({ err }, 'water-use rollup failed');
      },
    );
  }

  private async zoneRunEnded(zoneRunId: number) {
    const r = await this.d.db.execute<{ zone_id: number; date: string; timezone: string }>(sql`
      select zr.zone_id, to_char((zr.planned_start at time zone s.timezone)::date, 'YYYY-MM-DD') as date, s.timezone
      from zone_runs zr join sites s on s.id = zr.site_id where zr.id = ${zoneRunId}`);
    const row = r.rows[0];
    if (row) await recomputeZoneDay(this.d.db, row.zone_id, row.date, row.timezone);
  }

  private async runEnded(runId: number) {
    const r = await this.d.db.execute<{ zone_id: number; date: string; timezone: string }>(sql`
      select distinct zr.zone_id, to_char((zr.planned_start at time zone s.timezone)::date, 'YYYY-MM-DD') as date, s.timezone
      from zone_runs zr join sites s on s.id = zr.site_id where zr.run_id = ${runId}`);
    for (const row of r.rows) await recomputeZoneDay(this.d.db, row.zone_id, row.date, row.timezone);
  }

  /** Resolves when every rollup asked for so far is written (tests, shutdown). */
  idle(): Promise<void> {
    return this.chain;
  }

  async stop(): Promise<void> {
    this.unsubscribe?.();
    await this.chain;
  }
}
