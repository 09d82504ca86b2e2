import { sql } from 'drizzle-orm';
import { DateTime } from 'luxon';
import type { Db } from '../db/client';
import { mailPreferences, mailQueue } from '../db/schema/index';
import type { AlertKind, AlertView } from '../contracts/alerts';
import { alertViews } from '../alerts/store';
import { inList, ms } from '../history/sql';
import { renderMail } from './layout';
import { effective } from './preferences';
import { sendLogged, sitesOf, usersWhoSee, type MailCtx, type Recipient } from './context';

export const kindLabel: Record<AlertKind, string> = {
  controller_offline: 'controller offline',
  command_failed: 'command not carried out',
  valve_stuck_open: 'valve open when it should be closed',
  flow_while_closed: 'flow with every valve closed',
  high_flow: 'high flow',
  low_flow: 'low flow',
  low_voltage: 'low supply voltage',
  rain_hold: 'rain hold',
};

/** Queue a newly raised alert for everyone who may see its site and wants that kind. */
export async function queueAlertMail(db: Db, alert: AlertView, now: number): Promise<number> {
  const users = await usersWhoSee(db, alert.siteId);
  if (!users.length) return 0;
  const prefs = await db.select().from(mailPreferences).where(inList(sql`${mailPreferences.userId}`, users.map((u) => u.id)));
  const rows = users.flatMap((u) => {
    const p = effective(u.role, prefs.find((x) => x.userId === u.id));
    if (p.alertDelivery === 'off' || !p.alertKinds.includes(alert.kind)) return [];
    return [{ userId: u.id, alertId: alert.id, kind: alert.kind, digest: p.alertDelivery === 'daily_digest', queuedAt: new Date(now) }];
  });
  if (rows.length) await db.insert(mailQueue).values(rows);
  return rows.length;
}

type Pending = { id: number; user_id: number; alert_id: number; kind: AlertKind };

const fmt = (iso: string, tz: string) => DateTime.fromISO(iso).setZone(tz).toFormat('ccc d LLL yyyy HH:mm ZZZZ');

function alertLines(a: AlertView, tz: string): string[] {
  const lines = [`${a.siteName}${a.zoneName ? ` · ${a.zoneName}` : a.controllerName ? ` · ${a.controllerName}` : ''}`, a.message, `Raised ${fmt(a.openedAt, tz)}`];
  if (a.state === 'acknowledged') lines.push(`Acknowledged by ${a.acknowledgedBy?.name ?? 'someone'}`);
  if (a.state === 'resolved' && a.resolvedAt) lines.push(`Resolved ${fmt(a.resolvedAt, tz)}: ${a.resolution ?? ''}`.trim());
  return lines;
}

/**
 * Items still allowed for this person now: they still see the site, still want the kind and the
 * way of delivery. The rest is dropped, so a person removed from a site never gets its mail.
 */
async function keepAllowed(ctx: MailCtx, user: Recipient, items: Pending[], alerts: Map<number, AlertView>, digest: boolean): Promise<Pending[]> {
  const sees = await sitesOf(ctx.db, user);
  const [row] = await ctx.db.execute<{ alert_kinds: string[]; alert_delivery: 'immediate' | 'daily_digest' | 'off'; weekly_summary: boolean }>(
    sql`select alert_kinds, alert_delivery, weekly_summary from mail_preferences where user_id = ${user.id}`,
  ).then((r) => r.rows);
  const p = effective(user.role, row ? { alertKinds: row.alert_kinds, alertDelivery: row.alert_delivery, weeklySummary: row.weekly_summary } : null);
  const ok = (i: Pending) => {
    const a = alerts.get(i.alert_id);
    return !!a && (sees === 'all' || sees.has(a.siteId)) && p.alertDelivery === (digest ? 'daily_digest' : 'immediate') && p.alertKinds.includes(i.kind);
  };
  const drop = items.filter((i) => !ok(i)).map((i) => i.id);
  if (drop.length) await ctx.db.execute(sql`update mail_queue set dropped_at = now() where ${inList(sql`id`, drop)}`);
  return items.filter(ok);
}

async function pending(ctx: MailCtx, digest: boolean): Promise<{ items: Pending[]; users: Map<number, Recipient>; alerts: Map<number, AlertView> }> {
  const r = await ctx.db.execute<Pending>(sql`
    select q.id::int as id, q.user_id, q.alert_id, q.kind from mail_queue q
    where q.sent_at is null and q.dropped_at is null and q.digest = ${digest} order by q.id`);
  const items = r.rows;
  if (!items.length) return { items, users: new Map(), alerts: new Map() };
  const us = await ctx.db.execute<Recipient & { disabled: boolean }>(sql`
    select id, email, name, role::text as role, disabled from users where ${inList(sql`id`, [...new Set(items.map((i) => i.user_id))])}`);
  const as = await alertViews(ctx.db, inList(sql`a.id`, [...new Set(items.map((i) => i.alert_id))]));
  return {
    items,
    users: new Map(us.rows.filter((u) => !u.disabled).map((u) => [u.id, u])),
    alerts: new Map(as.map((a) => [a.id, a])),
  };
}

async function markSent(db: Db, ids: number[], at: Date) {
  if (ids.length) await db.execute(sql`update mail_queue set sent_at = ${at} where ${inList(sql`id`, ids)}`);
}

/**
 * Send what immediate-mode people are waiting for: one mail per person and alert kind, at most
 * one per ALERT_MAIL_THROTTLE_MINUTES; what arrives inside the window waits and goes in one mail.
 */
export async function flushAlertMail(ctx: MailCtx, now: number): Promise<number> {
  const { items, users, alerts } = await pending(ctx, false);
  const groups = new Map<string, Pending[]>();
  for (const i of items) groups.set(`${i.user_id}|${i.kind}`, [...(groups.get(`${i.user_id}|${i.kind}`) ?? []), i]);
  let sent = 0;
  for (const group of groups.values()) {
    const { user_id, kind } = group[0];
    const user = users.get(user_id);
    if (!user) {
      await ctx.db.execute(sql`update mail_queue set dropped_at = now() where ${inList(sql`id`, group.map((g) => g.id))}`);
      continue;
    }
    const last = await ctx.db.execute<{ at: string | null }>(sql`
      select max(sent_at) as at from mail_log where user_id = ${user_id} and category = 'alert' and key = ${kind}`);
    const lastAt = ms(last.rows[0]?.at);
    if (lastAt !== null && now - lastAt < ctx.throttleMs) continue;
    const keep = await keepAllowed(ctx, user, group, alerts, false);
    if (!keep.length) continue;
    const list = keep.map((k) => alerts.get(k.alert_id)!);
    const subject = list.length === 1 ? `[${ctx.firmName}] ${list[0].title}` : `[${ctx.firmName}] ${list.length} alerts: ${kindLabel[kind]}`;
    const body = renderMail(ctx.firmName, {
      intro: list.length === 1 ? `An alert was raised at ${list[0].siteName}.` : `${list.length} alerts of one kind (${kindLabel[kind]}) were raised. Alerts of a kind are mailed together at most once every ${Math.round(ctx.throttleMs / 60_000)} minutes.`,
      sections: list.map((a) => ({ heading: a.title, lines: alertLines(a, ctx.timezone) })),
      link: { label: 'Open the alerts in Runnel', url: `${ctx.baseUrl}/alerts` },
      footer: `You get this mail because your Runnel mail preferences ask for ${kindLabel[kind]} alerts at once. Change them in Runnel under your account.`,
    });
    const at = new Date(now);
    if (await sendLogged(ctx, user, 'alert', kind, { to: user.email, subject, ...body }, at)) {
      await markSent(ctx.db, keep.map((k) => k.id), at);
      sent++;
    }
  }
  return sent;
}

/** One mail per digest-mode person with everything queued for them since their last digest. Once per local day. */
export async function sendDailyDigests(ctx: MailCtx, now: number): Promise<number> {
  const { items, users, alerts } = await pending(ctx, true);
  const day = DateTime.fromMillis(now, { zone: ctx.timezone }).toISODate()!;
  const byUser = new Map<number, Pending[]>();
  for (const i of items) byUser.set(i.user_id, [...(byUser.get(i.user_id) ?? []), i]);
  let sent = 0;
  for (const [userId, group] of byUser) {
    const user = users.get(userId);
    if (!user) continue;
    const done = await ctx.db.execute(sql`select 1 from mail_log where user_id = ${userId} and category = 'digest' and key = ${day}`);
    if (done.rows.length) continue;
    const keep = await keepAllowed(ctx, user, group, alerts, true);
    if (!keep.length) continue;
    const list = keep.map((k) => alerts.get(k.alert_id)!).sort((a, b) => a.openedAt.localeCompare(b.openedAt));
    const stillOpen = list.filter((a) => a.state !== 'resolved').length;
    const subject = `[${ctx.firmName}] Daily alert digest, ${day}: ${list.length} alert${list.length === 1 ? '' : 's'}`;
    const body = renderMail(ctx.firmName, {
      intro: `${list.length} alert${list.length === 1 ? ' was' : 's were'} raised at your sites since your last digest; ${stillOpen} still open.`,
      sections: list.map((a) => ({ heading: a.title, lines: alertLines(a, ctx.timezone) })),
      link: { label: 'Open the alerts in Runnel', url: `${ctx.baseUrl}/alerts` },
      footer: 'You get this digest because your Runnel mail preferences ask for one a day. Change them in Runnel under your account.',
    });
    const at = new Date(now);
    if (await sendLogged(ctx, user, 'digest', day, { to: user.email, subject, ...body }, at)) {
      await markSent(ctx.db, keep.map((k) => k.id), at);
      sent++;
    }
  }
  return sent;
}
