import { and, eq, gt, isNull, lte } from 'drizzle-orm';
import { inIds } from '../db/batch';
import { DateTime } from 'luxon';
import type { Db } from '../db/client';
import { rainDelays, type Site } from '../db/schema/index';
import type { Fleet } from '../fleet/fleet';

export type Hold = { kind: 'sensor' | 'after_rain' | 'delay'; reason: string; until: number | null };

const fmt = (t: number, tz: string) => DateTime.fromMillis(t, { zone: tz }).toFormat('ccc d LLL HH:mm');

type RainDelay = typeof rainDelays.$inferSelect;

/** The manual rain delay in force at a site, the one that ends first. */
export async function activeRainDelay(db: Db, siteId: number, nowMs: number): Promise<RainDelay | null> {
  const [d] = await db
    .select()
    .from(rainDelays)
    .where(and(eq(rainDelays.siteId, siteId), isNull(rainDelays.cancelledAt), lte(rainDelays.startsAt, new Date(nowMs)), gt(rainDelays.until, new Date(nowMs))))
    .orderBy(rainDelays.until)
    .limit(1);
  return d ?? null;
}

/** The delays in force at several sites at once (one query), the one ending first per site. */
export async function activeRainDelays(db: Db, siteIds: readonly number[], nowMs: number): Promise<Map<number, RainDelay>> {
  const rows = await db
    .select()
    .from(rainDelays)
    .where(and(inIds(rainDelays.siteId, siteIds), isNull(rainDelays.cancelledAt), lte(rainDelays.startsAt, new Date(nowMs)), gt(rainDelays.until, new Date(nowMs))))
    .orderBy(rainDelays.until);
  const m = new Map<number, RainDelay>();
  for (const r of rows) if (!m.has(r.siteId)) m.set(r.siteId, r);
  return m;
}

/** Why scheduled watering is held at a site right now, or null. */
export async function siteHold(
  db: Db,
  fleet: Fleet,
  site: Site,
  nowMs: number,
  findDelay: (siteId: number, nowMs: number) => Promise<RainDelay | null> = (id, t) => activeRainDelay(db, id, t),
): Promise<Hold | null> {
  if (fleet.ofSite(site.id).some((b) => b.rain)) return { kind: 'sensor', reason: 'Held by rain: the rain sensor is wet', until: null };
  if (site.rainClearedAt) {
    const until = site.rainClearedAt.getTime() + site.rainDelayHours * 3_600_000;
    if (nowMs < until) return { kind: 'after_rain', reason: `Held by rain: the sensor dried ${fmt(site.rainClearedAt.getTime(), site.timezone)}; watering resumes ${fmt(until, site.timezone)}`, until };
  }
  const d = await findDelay(site.id, nowMs);
  if (d) return { kind: 'delay', reason: `Rain delay until ${fmt(d.until.getTime(), site.timezone)}${d.reason ? ` (${d.reason})` : ''}`, until: d.until.getTime() };
  return null;
}
