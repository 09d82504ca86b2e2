import { sql } from 'drizzle-orm';
import { DateTime } from 'luxon';
import type { Site } from '../db/schema/index';
import { siteDailyUse, siteWeather, siteZones } from '../history/site-data';
import { dateRange, inList } from '../history/sql';
import { sumPoint } from '../history/water-use';
import { renderMail } from './layout';
import { effective } from './preferences';
import { sendLogged, type MailCtx, type Recipient } from './context';

/** The Monday-to-Sunday week before `now`, in the mail timezone. */
export function lastWeek(now: number, tz: string): { start: string; end: string; key: string } {
  const start = DateTime.fromMillis(now, { zone: tz }).startOf('week').minus({ weeks: 1 });
  return { start: start.toISODate()!, end: start.plus({ days: 6 }).toISODate()!, key: `week:${start.toISODate()}` };
}

export type SiteWeek = {
  siteId: number;
  name: string;
  litres: number;
  basis: string;
  appliedMm: number;
  demandMm: number | null;
  rainMm: number | null;
  runs: number;
  notAsPlanned: number;
  zones: { name: string; litres: number; appliedMm: number }[];
};

/** One site's week of water use from the daily rollups and the weather. */
export async function siteWeek(ctx: Pick<MailCtx, 'db'>, site: Site, start: string, end: string): Promise<SiteWeek> {
  const dates = dateRange(start, end);
  const [zones, use, wx] = await Promise.all([siteZones(ctx.db, site.id), siteDailyUse(ctx.db, site.id, start, end), siteWeather(ctx.db, site.id, start, end)]);
  const t = sumPoint(zones, dates, use, wx, site);
  let notAsPlanned = 0;
  for (const m of use.values()) for (const [d, u] of m) if (d >= start && d <= end) notAsPlanned += u.notAsPlanned;
  return {
    siteId: site.id,
    name: site.name,
    litres: t.litres,
    basis: t.basis,
    appliedMm: t.appliedMm,
    demandMm: t.demandMm,
    rainMm: t.rainMm,
    runs: t.runs,
    notAsPlanned,
    zones: zones.map((z) => {
      const zt = sumPoint([z], dates, use, wx, site);
      return { name: z.name, litres: zt.litres, appliedMm: zt.appliedMm };
    }),
  };
}

const basisWord = (b: string) => (b === 'measured' ? 'measured' : b === 'mixed' ? 'partly measured, partly estimated' : b === 'none' ? 'no watering' : 'estimated');

/** The weekly summary of one owner: their member sites only. */
export async function weeklySummaryFor(ctx: MailCtx, owner: Recipient, now: number) {
  const { start, end } = lastWeek(now, ctx.timezone);
  const r = await ctx.db.execute<{ site_id: number }>(sql`select site_id from site_members where user_id = ${owner.id}`);
  const ids = r.rows.map((x) => x.site_id);
  if (!ids.length) return null;
  const sites = (await ctx.db.execute<Record<string, unknown>>(sql`select * from sites where ${inList(sql`id`, ids)} order by name`)).rows.map(
    (s) => ({ id: Number(s.id), name: String(s.name), latitude: Number(s.latitude), timezone: String(s.timezone) }) as Site,
  );
  const weeks = await Promise.all(sites.map((s) => siteWeek(ctx, s, start, end)));
  const subject = `[${ctx.firmName}] Water use ${start} to ${end}: ${weeks.map((w) => w.name).join(', ')}`;
  const body = renderMail(ctx.firmName, {
    intro: `Hello ${owner.name}, here is last week’s watering (${start} to ${end}) at your ${sites.length === 1 ? 'site' : 'sites'}.`,
    sections: weeks.map((w) => ({
      heading: w.name,
      lines: [
        `${Math.round(w.litres).toLocaleString('en-GB')} L (${basisWord(w.basis)}), ${w.appliedMm.toFixed(1)} mm applied over ${w.runs} zone run${w.runs === 1 ? '' : 's'}`,
        w.demandMm === null ? 'No weather recorded, so the plants’ demand is not known' : `Plant demand ${w.demandMm.toFixed(1)} mm; rain ${(w.rainMm ?? 0).toFixed(1)} mm`,
        ...(w.notAsPlanned ? [`${w.notAsPlanned} zone run${w.notAsPlanned === 1 ? '' : 's'} did not go as planned (see the run history)`] : []),
        ...w.zones.map((z) => `${z.name}: ${Math.round(z.litres).toLocaleString('en-GB')} L, ${z.appliedMm.toFixed(1)} mm`),
      ],
    })),
    link: { label: 'See the run history and the dry-spell review in Runnel', url: `${ctx.baseUrl}/sites/${sites[0].id}/review` },
    footer: 'You get this summary because your Runnel mail preferences ask for a weekly water-use summary. Change them in Runnel under your account.',
  });
  return { subject, body, weeks };
}

/** Send last week's summary to every owner who wants it, once per owner and week. */
export async function sendWeeklySummaries(ctx: MailCtx, now: number): Promise<number> {
  const { key } = lastWeek(now, ctx.timezone);
  const owners = await ctx.db.execute<Recipient & { alert_kinds: string[] | null; alert_delivery: 'immediate' | 'daily_digest' | 'off' | null; weekly_summary: boolean | null }>(sql`
    select u.id, u.email, u.name, u.role::text as role, p.alert_kinds, p.alert_delivery, p.weekly_summary
    from users u left join mail_preferences p on p.user_id = u.id
    where u.role = 'owner' and not u.disabled
      and not exists (select 1 from mail_log l where l.user_id = u.id and l.category = 'weekly' and l.key = ${key})
    order by u.id`);
  let sent = 0;
  for (const o of owners.rows) {
    const p = effective(o.role, o.alert_delivery ? { alertKinds: o.alert_kinds ?? [], alertDelivery: o.alert_delivery, weeklySummary: !!o.weekly_summary } : null);
    if (!p.weeklySummary) continue;
    const summary = await weeklySummaryFor(ctx, o, now);
    if (!summary) continue;
    if (await sendLogged(ctx, o, 'weekly', key, { to: o.email, subject: summary.subject, ...summary.body }, new Date(now))) sent++;
  }
  return sent;
}
