import { sql } from 'drizzle-orm';
import type { Logger } from 'pino';
import type { Clock } from '../clock';
import type { Db } from '../db/client';
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
    // The reading writer merges each batch's hourly sums after updating the board's row, in one
    // transaction: holding that row first, a recompute never overwrites sums it did not see.
    await tx.execute(sql`select id from controllers where ${controllerId === null ? sql`true` : sql`id = ${controllerId}`} order by id for no key update`);
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
 * Fills readings_hourly in for readings that did not come through the reading writer (which
 * merges each batch's hourly sums in the batch's own transaction): on start, per controller, the
 * hours since its last hourly row are recomputed from the readings.
 */
export class ReadingsRollup {
  private work: Promise<unknown> = Promise.resolve();

  constructor(private d: { db: Db; clock: Clock; log: Logger }) {}

  start(): void {
    this.work = this.catchUp().catch((err) => this.d.log.warn({ err }, 'readings rollup catch-up failed'));
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
    await this.work;
  }
}
