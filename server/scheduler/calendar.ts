import { CronExpressionParser } from 'cron-parser';
import { DateTime } from 'luxon';

/** Site watering restrictions, as stored on the site. */
export type Restrictions = {
  dayRule: 'any' | 'weekdays' | 'odd' | 'even';
  weekdays: number[];
  noWateringWindows: { startMinute: number; endMinute: number }[];
};

export type DayRule =
  | { kind: 'weekdays'; weekdays: number[] }
  | { kind: 'interval'; everyDays: number; anchorDate: string }
  | { kind: 'odd' }
  | { kind: 'even' };

export type ProgramCalendar = {
  /** Local start times, "HH:MM". */
  startTimes: string[];
  dayRule: DayRule;
  activeFrom: string | null;
  activeTo: string | null;
};

const WEEKDAY_NAMES = ['Sundays', 'Mondays', 'Tuesdays', 'Wednesdays', 'Thursdays', 'Fridays', 'Saturdays'];

/** The cron expressions a program's calendar stands for (one per start time). Every-N-days is filtered after. */
export function programCrons(c: ProgramCalendar): string[] {
  return c.startTimes.map((t) => {
    const [h, m] = t.split(':').map(Number);
    switch (c.dayRule.kind) {
      case 'weekdays':
        return `${m} ${h} * * ${[...c.dayRule.weekdays].sort().join(',')}`;
      case 'odd':
        return `${m} ${h} 1-31/2 * *`;
      case 'even':
        return `${m} ${h} 2-30/2 * *`;
      case 'interval':
        return `${m} ${h} * * *`;
    }
  });
}

/**
 * Every start of the program in (fromMs, toMs], in the site's timezone. cron-parser evaluates
 * local wall-clock times: a start inside the hour skipped in spring runs once, shifted by that
 * hour; a start inside the hour repeated in autumn runs once (the first time).
 */
export function occurrences(c: ProgramCalendar, tz: string, fromMs: number, toMs: number): number[] {
  const out = new Set<number>();
  for (const expr of programCrons(c)) {
    const it = CronExpressionParser.parse(expr, { tz, currentDate: new Date(fromMs), endDate: new Date(toMs) });
    while (it.hasNext()) {
      const t = it.next().getTime();
      if (t <= fromMs || t > toMs) continue;
      const local = DateTime.fromMillis(t, { zone: tz });
      const date = local.toISODate()!;
      if (c.activeFrom && date < c.activeFrom) continue;
      if (c.activeTo && date > c.activeTo) continue;
      if (c.dayRule.kind === 'interval') {
        const days = Math.round(DateTime.fromISO(date, { zone: tz }).diff(DateTime.fromISO(c.dayRule.anchorDate, { zone: tz }), 'days').days);
        if (days < 0 || days % c.dayRule.everyDays !== 0) continue;
      }
      out.add(t);
    }
  }
  return [...out].sort((a, b) => a - b);
}

/** Why watering is not allowed on this local day at the site, or null when it is. */
export function dayRestriction(r: Restrictions, tMs: number, tz: string): string | null {
  const local = DateTime.fromMillis(tMs, { zone: tz });
  const dom = local.day;
  const dow = local.weekday % 7; // luxon: 1 = Monday … 7 = Sunday → 0 = Sunday
  if (r.dayRule === 'odd' && dom % 2 === 0) return 'Watering is allowed on odd days only at this site';
  if (r.dayRule === 'even' && dom % 2 === 1) return 'Watering is allowed on even days only at this site';
  if (r.dayRule === 'weekdays' && !r.weekdays.includes(dow)) return `No watering on ${WEEKDAY_NAMES[dow]} at this site`;
  return null;
}

const hhmm = (m: number) => `${String(Math.floor(m / 60) % 24).padStart(2, '0')}:${String(m % 60).padStart(2, '0')}`;

/** Local minute of the day (0…1439). */
export function localMinute(tMs: number, tz: string): number {
  const l = DateTime.fromMillis(tMs, { zone: tz });
  return l.hour * 60 + l.minute;
}

function inWindow(w: { startMinute: number; endMinute: number }, minute: number): boolean {
  return w.startMinute < w.endMinute ? minute >= w.startMinute && minute < w.endMinute : minute >= w.startMinute || minute < w.endMinute;
}

/** The no-watering window that covers any part of [startMs, endMs), with a message, or null. */
export function windowConflict(r: Restrictions, startMs: number, endMs: number, tz: string): string | null {
  if (!r.noWateringWindows.length) return null;
  for (let t = startMs; t < Math.max(endMs, startMs + 1); t += 60_000) {
    const m = localMinute(t, tz);
    const w = r.noWateringWindows.find((x) => inWindow(x, m));
    if (w) return `No watering between ${hhmm(w.startMinute)} and ${hhmm(w.endMinute)} at this site`;
  }
  return null;
}

/** Local calendar date (YYYY-MM-DD) of a moment at the site. */
export const localDate = (tMs: number, tz: string) => DateTime.fromMillis(tMs, { zone: tz }).toISODate()!;
