import { getTableColumns, sql, type SQL } from 'drizzle-orm';
import type { Clock } from '../clock';
import type { Db } from '../db/client';
import { alerts, type AlertRow } from '../db/schema/index';
import type { LiveBus } from '../live/bus';
import { alertSeverityOf, type AlertKind, type AlertLiveEvent, type AlertView } from '../contracts/alerts';
import { iso } from '../history/sql';

export type RaiseInput = {
  kind: AlertKind;
  /** What the condition is about, e.g. "controller:12" or "zone:40"; with the kind it makes the episode key. */
  subject: string;
  siteId: number;
  controllerId?: number | null;
  zoneId?: number | null;
  title: string;
  message: string;
  details?: Record<string, unknown>;
};

export const episodeKey = (kind: AlertKind, subject: string) => `${kind}:${subject}`;

const viewSelect = sql`select a.*, s.name as site_name, c.name as controller_name, z.name as zone_name, u.name as ack_name
  from alerts a join sites s on s.id = a.site_id left join controllers c on c.id = a.controller_id
  left join zones z on z.id = a.zone_id left join users u on u.id = a.acknowledged_by`;

export function viewOf(r: Record<string, unknown>): AlertView {
  return {
    id: Number(r.id),
    siteId: Number(r.site_id),
    siteName: String(r.site_name),
    controllerId: r.controller_id === null ? null : Number(r.controller_id),
    controllerName: (r.controller_name as string | null) ?? null,
    zoneId: r.zone_id === null ? null : Number(r.zone_id),
    zoneName: (r.zone_name as string | null) ?? null,
    kind: r.kind as AlertKind,
    severity: r.severity as AlertView['severity'],
    state: r.state as AlertView['state'],
    title: String(r.title),
    message: String(r.message),
    details: (r.details as Record<string, unknown>) ?? {},
    openedAt: iso(r.opened_at as Date)!,
    lastSeenAt: iso(r.last_seen_at as Date)!,
    acknowledgedAt: iso(r.acknowledged_at as Date | null),
    acknowledgedBy: r.acknowledged_by === null ? null : { id: Number(r.acknowledged_by), name: String(r.ack_name ?? '') },
    resolvedAt: iso(r.resolved_at as Date | null),
    resolution: (r.resolution as string | null) ?? null,
  };
}

export async function alertViews(db: Db, where: SQL, tail: SQL = sql``): Promise<AlertView[]> {
  const r = await db.execute<Record<string, unknown>>(sql`${viewSelect} where ${where} ${tail}`);
  return r.rows.map(viewOf);
}

export async function alertView(db: Db, id: number): Promise<AlertView | null> {
  return (await alertViews(db, sql`a.id = ${id}`))[0] ?? null;
}

/**
 * Writes alerts and tells the live socket. Raising is idempotent per episode: the partial unique
 * index on episode_key (while not resolved) makes a second raise only touch last_seen_at, even
 * from another server instance.
 */
export class AlertStore {
  private raisedListeners: ((a: AlertView) => void)[] = [];

  constructor(private d: { db: Db; bus: LiveBus; clock: Clock }) {}

  onRaised(fn: (a: AlertView) => void) {
    this.raisedListeners.push(fn);
  }

  private publish(change: AlertLiveEvent['change'], alert: AlertView) {
    const e: AlertLiveEvent = { type: 'alert', siteId: alert.siteId, change, alert };
    this.d.bus.publish(e);
  }

  /** Raise (or keep raised) an alert; returns it and whether this call opened the episode. */
  async raise(input: RaiseInput): Promise<{ alert: AlertView; created: boolean }> {
    const now = new Date(this.d.clock.now());
    const [row] = await this.d.db
      .insert(alerts)
      .values({
        siteId: input.siteId,
        controllerId: input.controllerId ?? null,
        zoneId: input.zoneId ?? null,
        kind: input.kind,
        severity: alertSeverityOf[input.kind],
        state: 'open',
        episodeKey: episodeKey(input.kind, input.subject),
        title: input.title.slice(0, 200),
        message: input.message,
        details: input.details ?? {},
        openedAt: now,
        lastSeenAt: now,
      })
      .onConflictDoUpdate({ target: alerts.episodeKey, targetWhere: sql`state <> 'resolved'`, set: { lastSeenAt: now } })
      .returning({ ...getTableColumns(alerts), created: sql<boolean>`(xmax = 0)` });
    const alert = (await alertView(this.d.db, row.id))!;
    if (row.created) {
      this.publish('raised', alert);
      for (const fn of this.raisedListeners) fn(alert);
    }
    return { alert, created: row.created };
  }

  /** End the episode, if one is live. */
  async resolve(kind: AlertKind, subject: string, resolution: string): Promise<AlertView | null> {
    const rows = await this.d.db.execute<{ id: number }>(sql`
      update alerts set state = 'resolved', resolved_at = ${new Date(this.d.clock.now())}, resolution = ${resolution}
      where episode_key = ${episodeKey(kind, subject)} and state <> 'resolved' returning id`);
    const id = rows.rows[0]?.id;
    if (!id) return null;
    const alert = (await alertView(this.d.db, id))!;
    this.publish('resolved', alert);
    return alert;
  }

  /** Episode keys that are raised now (to pick up where a restart left off). */
  async liveKeys(): Promise<Map<string, AlertRow['openedAt']>> {
    const rows = await this.d.db.select({ key: alerts.episodeKey, openedAt: alerts.openedAt }).from(alerts).where(sql`state <> 'resolved'`);
    return new Map(rows.map((r) => [r.key, r.openedAt]));
  }

  async acknowledge(id: number, userId: number): Promise<AlertView | null> {
    const rows = await this.d.db.execute<{ id: number }>(sql`
      update alerts set state = 'acknowledged', acknowledged_at = ${new Date(this.d.clock.now())}, acknowledged_by = ${userId || null}
      where id = ${id} and state = 'open' returning id`);
    if (!rows.rows[0]) return null;
    const alert = (await alertView(this.d.db, id))!;
    this.publish('acknowledged', alert);
    return alert;
  }
}
