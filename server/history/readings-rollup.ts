import { sql } from 'drizzle-orm';
import type { Logger } from 'pino';
import type { Clock } from '../clock';
import type { Db } from '../db/client';
import type { LiveBus } from '../live/bus';
import { ms } from './sql';

export const HOUR_MS = 3_600_000;
export const hourOf = (t: number) => Math.floor(t / HOUR_MS) * HOUR_MS;

const hourExpr = sql`date_trunc('hour', at, 'UTC')`;

/** Recompute a controller's hourly rows for the hours in [fromMs, toMs) from the readings. */
export async function recomputeHours(db: Db, controllerId: number | null, fromMs: number, toMs: number): Promise<void> {
  const from = new Date(hourOf(fromMs));
  const to = new Date(hourOf(toMs - 1) + HOUR_MS);
  const who = controllerId === null ? sql`true` : sql`controller_id = ${controllerId}`;
  await db.transaction(async (tx) => {
    await tx.execute(sql`delete from readings_hourly where ${who} and hour >= ${from} and hour < ${to}`);
    await tx.execute(sql`insert into readings_hourly (controller_id, hour, n, moisture_sum, moisture_min, moisture_max,
        supply_sum, supply_min, supply_max, flow_n, flow_sum, flow_min, flow_max, updated_at)
      select controller_id, ${hourExpr}, count(*)::int, sum(moisture_pct), min(moisture_pct), max(moisture_pct),
        sum(supply_v), min(supply_v), max(supply_v), count(flow_lpm)::int, sum(flow_lpm), min(flow_lpm), max(flow_lpm), now()
      from readings where ${who} and at >= ${from} and at < ${to}
      group by 1, 2
      on conflict (controller_id, hour) do update set n = excluded.n, moisture_sum = excluded.moisture_sum, moisture_min = excluded.moisture_min,
        moisture_max = excluded.moisture_max, supply_sum = excluded.supply_sum, supply_min = excluded.supply_min, supply_max = excluded.supply_max,
        flow_n = excluded.flow_n, flow_sum = excluded.flow_sum, flow_min = excluded.flow_min, flow_max = excluded.flow_max, updated_at = excluded.updated_at`);
  });
}

/**
 * Keeps readings_hourly current. Every telemetry message is a 'reading' event (its last sample's
 * time); the hours those touch — and the hour before, for a message that spans an hour boundary
 * or a board replaying its offline buffer — are marked and recomputed on a short real-time
 * timer. On start it fills in, per controller, the hours since its last hourly row.
 */
export class ReadingsRollup {
  private dirty = new Map<number, Set<number>>();
  private timer: NodeJS.Timeout | null = null;
  private unsubscribe: (() => void) | null = null;
  private work: Promise<unknown> = Promise.resolve();
  private busy = false;

  constructor(private d: { db: Db; bus: LiveBus; clock: Clock; log: Logger; flushMs?: number }) {}

  start(): void {
    this.unsubscribe = this.d.bus.subscribe((e) => {
      if (e.type !== 'reading' || typeof e.at !== 'string') return;
      const h = hourOf(Date.parse(e.at));
      const set = this.dirty.get(e.controllerId as number) ?? new Set<number>();
      set.add(h).add(h - HOUR_MS);
      this.dirty.set(e.controllerId as number, set);
    });
    this.timer = setInterval(() => {
      if (!this.busy) void this.flush();
    }, this.d.flushMs ?? 30_000);
    this.timer.unref();
    this.serial(() => this.catchUp());
  }

  private serial(job: () => Promise<void>): Promise<void> {
    const next = this.work.then(job).catch((err) => this.d.log.warn({ err }, 'readings rollup failed'));
    this.work = next;
    return next;
  }

  /** Recompute every hour marked since the last flush (tests call this). */
  flush(): Promise<void> {
    this.busy = true;
    return this.serial(async () => {
      const batch = this.dirty;
      this.dirty = new Map();
      for (const [controllerId, hours] of batch) {
        // contiguous runs of hours, one statement each
        const sorted = [...hours].sort((a, b) => a - b);
        let start = sorted[0];
        let prev = sorted[0];
        for (const h of [...sorted.slice(1), Infinity]) {
          if (h === prev + HOUR_MS) {
            prev = h;
            continue;
          }
          await recomputeHours(this.d.db, controllerId, start, prev + HOUR_MS);
          start = prev = h;
        }
      }
    }).finally(() => {
      this.busy = false;
    });
  }

  /** Fill in each controller's hours from its last hourly row (or its first reading) to now. */
  private async catchUp() {
    const cs = await this.d.db.execute<{ id: number; last: string | null }>(sql`
      select c.id, (select max(hour) from readings_hourly h where h.controller_id = c.id) as last from controllers c`);
    const now = this.d.clock.now();
    for (const c of cs.rows) {
      let from = ms(c.last);
      if (from === null) {
        const first = await this.d.db.execute<{ at: string | null }>(sql`select min(at) as at from readings where controller_id = ${c.id}`);
        from = ms(first.rows[0]?.at);
        if (from === null) continue;
      }
      for (let t = hourOf(from); t <= now; t += 7 * 24 * HOUR_MS) await recomputeHours(this.d.db, c.id, t, Math.min(t + 7 * 24 * HOUR_MS, now + HOUR_MS));
    }
  }

  idle(): Promise<unknown> {
    return this.work;
  }

  async stop(): Promise<void> {
    this.unsubscribe?.();
    if (this.timer) clearInterval(this.timer);
    await this.flush();
  }
}
