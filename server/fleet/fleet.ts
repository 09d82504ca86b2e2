import { eq, isNull } from 'drizzle-orm';
import type { Db } from '../db/client';
import { controllers, zones } from '../db/schema/index';
import type { Sample } from '../contracts/protocol';

export type RelayLive = { open: boolean; since: number | null; plannedEnd: number | null; cmdId: string | null };
export type RecentPoint = { at: number; moisturePct: number; flowLpm: number | null; supplyV: number };

export type BoardLive = {
  controllerId: number;
  serial: string;
  siteId: number;
  name: string;
  relayCount: number;
  staggerMs: number;
  maxConcurrentValves: number;
  masterValveRelay: number | null;
  hasFlowSensor: boolean;
  online: boolean;
  lastSeenAt: number | null;
  clockOffsetMs: number;
  rain: boolean;
  relays: RelayLive[];
  zoneByRelay: Map<number, number>;
  latest: (Omit<Sample, 'at'> & { atMs: number }) | null;
  recent: RecentPoint[];
};

const RECENT_CAP = 120;

/** What the server knows right now about every board: loaded from the database, kept current by the gateway. */
export class Fleet {
  private bySerial = new Map<string, BoardLive>();
  private byId = new Map<number, BoardLive>();
  /** Per site and per zone, rebuilt after a board is added, changed or removed (thousands of zones start at once). */
  private index: { bySite: Map<number, BoardLive[]>; byZone: Map<number, { board: BoardLive; relay: number }> } | null = null;

  constructor(private db: Db) {}

  private indexed() {
    if (!this.index) {
      const bySite = new Map<number, BoardLive[]>();
      const byZone = new Map<number, { board: BoardLive; relay: number }>();
      for (const b of this.byId.values()) {
        bySite.set(b.siteId, [...(bySite.get(b.siteId) ?? []), b]);
        for (const [relay, z] of b.zoneByRelay) byZone.set(z, { board: b, relay });
      }
      this.index = { bySite, byZone };
    }
    return this.index;
  }

  async load(): Promise<void> {
    const cs = await this.db.select().from(controllers).where(isNull(controllers.retiredAt));
    const zs = await this.db.select({ id: zones.id, controllerId: zones.controllerId, relay: zones.relay }).from(zones);
    for (const c of cs) this.upsert(c, zs.filter((z) => z.controllerId === c.id));
  }

  /** Re-read one controller's settings and zone wiring (after an edit, or on first contact). */
  async refresh(controllerId: number): Promise<BoardLive | null> {
    const [c] = await this.db.select().from(controllers).where(eq(controllers.id, controllerId));
    if (!c || c.retiredAt) {
      const old = this.byId.get(controllerId);
      if (old) {
        this.byId.delete(controllerId);
        this.bySerial.delete(old.serial);
        this.index = null;
      }
      return null;
    }
    const zs = await this.db.select({ id: zones.id, controllerId: zones.controllerId, relay: zones.relay }).from(zones).where(eq(zones.controllerId, c.id));
    return this.upsert(c, zs);
  }

  async refreshSerial(serial: string): Promise<BoardLive | null> {
    const [c] = await this.db.select({ id: controllers.id }).from(controllers).where(eq(controllers.serial, serial));
    return c ? this.refresh(c.id) : null;
  }

  private upsert(c: typeof controllers.$inferSelect, zs: { id: number; relay: number }[]): BoardLive {
    const old = this.byId.get(c.id);
    const relays = Array.from({ length: c.relayCount }, (_, i) => old?.relays[i] ?? { open: false, since: null, plannedEnd: null, cmdId: null });
    const b: BoardLive = {
      controllerId: c.id,
      serial: c.serial,
      siteId: c.siteId,
      name: c.name,
      relayCount: c.relayCount,
      staggerMs: c.staggerMs,
      maxConcurrentValves: c.maxConcurrentValves,
      masterValveRelay: c.masterValveRelay,
      hasFlowSensor: c.hasFlowSensor,
      online: old?.online ?? c.online,
      lastSeenAt: old?.lastSeenAt ?? c.lastSeenAt?.getTime() ?? null,
      clockOffsetMs: old?.clockOffsetMs ?? c.clockOffsetMs,
      rain: old?.rain ?? c.rainTripped,
      relays,
      zoneByRelay: new Map(zs.map((z) => [z.relay, z.id])),
      latest: old?.latest ?? null,
      recent: old?.recent ?? [],
    };
    if (old && old.serial !== c.serial) this.bySerial.delete(old.serial);
    this.byId.set(c.id, b);
    this.bySerial.set(c.serial, b);
    this.index = null;
    return b;
  }

  get(serial: string): BoardLive | undefined {
    return this.bySerial.get(serial);
  }
  getById(id: number): BoardLive | undefined {
    return this.byId.get(id);
  }
  all(): BoardLive[] {
    return [...this.byId.values()];
  }
  ofSite(siteId: number): BoardLive[] {
    return [...(this.indexed().bySite.get(siteId) ?? [])];
  }
  relayOfZone(zoneId: number): { board: BoardLive; relay: number } | null {
    return this.indexed().byZone.get(zoneId) ?? null;
  }

  pushRecent(b: BoardLive, p: RecentPoint) {
    b.recent.push(p);
    if (b.recent.length > RECENT_CAP) b.recent.splice(0, b.recent.length - RECENT_CAP);
  }
}
