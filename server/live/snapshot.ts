import { inArray } from 'drizzle-orm';
import type { Db } from '../db/client';
import { sites } from '../db/schema/index';
import type { Fleet } from '../fleet/fleet';
import type { Actor } from '../services/actor';
import type { ValveDispatcher } from '../services/dispatcher';

const iso = (t: number | null | undefined) => (t ? new Date(t).toISOString() : null);

/** Everything a person may see of the fleet right now. */
export async function buildSnapshot(db: Db, fleet: Fleet, dispatcher: ValveDispatcher | null, actor: Actor, extra?: (siteIds: number[]) => Promise<Record<string, unknown>>) {
  const rows =
    actor.siteIds === 'all'
      ? await db.select({ id: sites.id, name: sites.name, timezone: sites.timezone }).from(sites)
      : actor.siteIds.size
        ? await db.select({ id: sites.id, name: sites.name, timezone: sites.timezone }).from(sites).where(inArray(sites.id, [...actor.siteIds]))
        : [];
  const siteIds = new Set(rows.map((r) => r.id));
  const boards = fleet.all().filter((b) => siteIds.has(b.siteId));
  const controllers = boards.map((b) => ({
    controllerId: b.controllerId,
    siteId: b.siteId,
    serial: b.serial,
    name: b.name,
    online: b.online,
    lastSeenAt: iso(b.lastSeenAt),
    rain: b.rain,
    hasFlowSensor: b.hasFlowSensor,
    latest: b.latest
      ? { at: iso(b.latest.atMs), moisturePct: b.latest.moisturePct, supplyV: b.latest.supplyV, flowLpm: b.latest.flowLpm, rssi: b.latest.rssi, rain: b.latest.rain }
      : null,
    recent: b.recent.slice(-60).map((p) => ({ at: iso(p.at), moisturePct: p.moisturePct, flowLpm: p.flowLpm, supplyV: p.supplyV })),
  }));
  const openValves = boards.flatMap((b) =>
    b.relays
      .map((r, i) => ({ r, relay: i + 1 }))
      .filter(({ r }) => r.open)
      .map(({ r, relay }) => ({
        siteId: b.siteId,
        controllerId: b.controllerId,
        zoneId: b.zoneByRelay.get(relay) ?? null,
        relay,
        master: relay === b.masterValveRelay,
        since: iso(r.since),
        plannedEnd: iso(r.plannedEnd),
      })),
  );
  const queued = dispatcher ? rows.flatMap((s) => dispatcher.siteActivity(s.id).queue.map((q) => ({ ...q, siteId: s.id }))) : [];
  return {
    type: 'snapshot' as const,
    at: new Date().toISOString(),
    sites: rows.map((s) => ({ ...s, rain: boards.some((b) => b.siteId === s.id && b.rain) })),
    controllers,
    openValves,
    queued,
    ...(extra ? await extra([...siteIds]) : {}),
  };
}
