import { sql } from 'drizzle-orm';
import type { Clock } from '../clock';
import type { Db } from '../db/client';
import { conflict, forbidden, notFound } from '../errors';
import { LiveBus } from '../live/bus';
import type { Actor } from '../services/actor';
import { canSeeSite } from '../services/actor';
import { recordAudit } from '../services/audit';
import { loadVisibleSite } from '../services/sites';
import type { AlertListQuery, AlertListResponse, AlertSeverity, AlertView } from '../contracts/alerts';
import { and, inList, siteScope } from '../history/sql';
import { AlertStore, alertView, alertViews } from './store';

type Ctx = { db: Db; actor: Actor };

/** Alerts of the sites the person may see, newest first, with the counts the layout's badge shows. */
export async function listAlerts(ctx: Ctx, q: AlertListQuery): Promise<AlertListResponse> {
  if (q.siteId !== undefined) await loadVisibleSite(ctx, q.siteId);
  const scope = siteScope(sql`a.site_id`, ctx.actor);
  const states = q.state === 'all' ? null : q.state === 'active' ? ['open', 'acknowledged'] : q.state;
  const where = and([
    scope,
    states ? inList(sql`a.state::text`, states) : undefined,
    q.kind ? inList(sql`a.kind`, q.kind) : undefined,
    q.siteId !== undefined ? sql`a.site_id = ${q.siteId}` : undefined,
    q.controllerId !== undefined ? sql`a.controller_id = ${q.controllerId}` : undefined,
    q.zoneId !== undefined ? sql`a.zone_id = ${q.zoneId}` : undefined,
  ]);
  const offset = (q.page - 1) * q.pageSize;
  const [items, total, counts] = await Promise.all([
    alertViews(ctx.db, where, sql`order by a.opened_at desc, a.id desc limit ${q.pageSize} offset ${offset}`),
    ctx.db.execute<{ n: number }>(sql`select count(*)::int as n from alerts a where ${where}`),
    ctx.db.execute<{ state: string; severity: AlertSeverity; n: number }>(sql`
      select a.state::text as state, a.severity::text as severity, count(*)::int as n from alerts a
      where ${and([scope, sql`a.state <> 'resolved'`])} group by 1, 2`),
  ]);
  const c: AlertListResponse['counts'] = { open: 0, acknowledged: 0, openBySeverity: { critical: 0, warning: 0, info: 0 } };
  for (const r of counts.rows) {
    if (r.state === 'open') {
      c.open += r.n;
      c.openBySeverity[r.severity] += r.n;
    } else c.acknowledged += r.n;
  }
  return { items, page: q.page, pageSize: q.pageSize, total: total.rows[0]?.n ?? 0, counts: c };
}

export async function getAlert(ctx: Ctx, id: number): Promise<AlertView> {
  const a = await alertView(ctx.db, id);
  if (!a || !canSeeSite(ctx.actor, a.siteId)) throw notFound('Alert');
  return a;
}

/** Someone has seen the alert and is on it. Owners may look but not acknowledge. */
export async function acknowledgeAlert(ctx: Ctx & { bus?: LiveBus; clock: Clock }, id: number): Promise<AlertView> {
  const a = await getAlert(ctx, id);
  if (ctx.actor.role === 'owner') throw forbidden('Owners may not acknowledge alerts');
  if (a.state === 'acknowledged') return a;
  if (a.state === 'resolved') throw conflict('alert_resolved', 'This alert has already been resolved');
  const store = new AlertStore({ db: ctx.db, bus: ctx.bus ?? new LiveBus(), clock: ctx.clock });
  const done = (await store.acknowledge(id, ctx.actor.userId)) ?? (await getAlert(ctx, id));
  await recordAudit(ctx.db, ctx.actor, { action: 'alert.acknowledge', entityType: 'alert', entityId: id, siteId: a.siteId, before: { state: a.state }, after: { state: done.state } });
  return done;
}
