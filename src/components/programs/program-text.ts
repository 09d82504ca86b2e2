import type { Restrictions } from '../../types/api';
import type { DayRule, Program, ProgramMode } from '../../types/programs';
import { minuteToHhmm, weekdayNames, weekdayOrder } from '../sites/restrictions-text';

const fullDay = ['Sunday', 'Monday', 'Tuesday', 'Wednesday', 'Thursday', 'Friday', 'Saturday'];

function list(words: string[]): string {
  return words.length <= 1 ? words.join('') : `${words.slice(0, -1).join(', ')} and ${words[words.length - 1]}`;
}

/** "Mon, Wed and Fri", "Every 3 days from 2026-06-01", "Odd-numbered dates". */
export function dayRuleText(r: DayRule): string {
  switch (r.kind) {
    case 'weekdays': {
      const days = weekdayOrder.filter((d) => r.weekdays.includes(d));
      if (days.length === 7) return 'Every day';
      if (days.length === 1) return `${fullDay[days[0]]}s`;
      return list(days.map((d) => weekdayNames[d]));
    }
    case 'interval':
      return r.everyDays === 1 ? 'Every day' : `Every ${r.everyDays} days, counting from ${r.anchorDate}`;
    case 'odd':
      return 'Odd-numbered dates';
    case 'even':
      return 'Even-numbered dates';
  }
}

export const modeLabels: Record<ProgramMode, string> = {
  fixed: 'Set minutes',
  seasonal: 'Set minutes × season',
  weather: 'From the weather',
};

export function modeText(p: Pick<Program, 'mode' | 'seasonalPct'>): string {
  if (p.mode === 'seasonal') return `Set minutes at ${p.seasonalPct} %`;
  return modeLabels[p.mode];
}

const formatters = new Map<string, Intl.DateTimeFormat>();
function formatter(timeZone: string, key: string, opts: Intl.DateTimeFormatOptions): Intl.DateTimeFormat {
  const k = `${timeZone}|${key}`;
  let f = formatters.get(k);
  if (!f) {
    f = new Intl.DateTimeFormat('en-GB', { timeZone, hour12: false, ...opts });
    formatters.set(k, f);
  }
  return f;
}

/** "Wed 3 Jun, 04:30" in the site's timezone. */
export function siteDateTime(iso: string | number, timeZone: string): string {
  return formatter(timeZone, 'dt', { weekday: 'short', day: 'numeric', month: 'short', hour: '2-digit', minute: '2-digit' }).format(new Date(iso));
}

/** "04:30" in the site's timezone. */
export function siteClock(iso: string | number, timeZone: string): string {
  return formatter(timeZone, 'hm', { hour: '2-digit', minute: '2-digit' }).format(new Date(iso));
}

/** "Wed 3 Jun" for a YYYY-MM-DD date. */
export function dayLabel(date: string): string {
  return formatter('UTC', 'day', { weekday: 'short', day: 'numeric', month: 'short' }).format(new Date(`${date}T12:00:00Z`));
}

/** The site's no-watering hours a start time falls in (the server's rule, checked as the user types), or null. */
export function windowOfStart(time: string, r: Restrictions | undefined): string | null {
  const m = /^([01]\d|2[0-3]):([0-5]\d)$/.exec(time);
  if (!m || !r) return null;
  const minute = Number(m[1]) * 60 + Number(m[2]);
  const w = r.noWateringWindows.find((x) =>
    x.startMinute < x.endMinute ? minute >= x.startMinute && minute < x.endMinute : minute >= x.startMinute || minute < x.endMinute,
  );
  return w ? `${minuteToHhmm(w.startMinute)}–${minuteToHhmm(w.endMinute)}` : null;
}
