import type { Restrictions } from '../../types/api';

export const weekdayNames = ['Sun', 'Mon', 'Tue', 'Wed', 'Thu', 'Fri', 'Sat'];
/** Monday first, as most watering rules are written. */
export const weekdayOrder = [1, 2, 3, 4, 5, 6, 0];

export function minuteToHhmm(m: number): string {
  return `${String(Math.floor(m / 60)).padStart(2, '0')}:${String(m % 60).padStart(2, '0')}`;
}

/** "HH:MM" (00:00–24:00) → minutes of the day; undefined when empty or malformed. */
export function hhmmToMinute(s: string): number | undefined {
  const m = /^(\d{1,2}):(\d{2})$/.exec(s.trim());
  if (!m) return undefined;
  const h = Number(m[1]);
  const min = Number(m[2]);
  if (min > 59 || h > 24 || (h === 24 && min > 0)) return undefined;
  return h * 60 + min;
}

function list(words: string[]): string {
  return words.length <= 1 ? words.join('') : `${words.slice(0, -1).join(', ')} and ${words[words.length - 1]}`;
}

/** A site's watering restrictions in plain words. */
export function restrictionsText(r: Restrictions): { days: string; hours: string } {
  const days =
    r.dayRule === 'weekdays'
      ? `${list(weekdayOrder.filter((d) => r.weekdays.includes(d)).map((d) => weekdayNames[d]))} only`
      : r.dayRule === 'odd'
        ? 'Odd-numbered dates only'
        : r.dayRule === 'even'
          ? 'Even-numbered dates only'
          : 'Any day';
  const hours = r.noWateringWindows.length
    ? `No watering ${list(r.noWateringWindows.map((w) => `${minuteToHhmm(w.startMinute)}–${minuteToHhmm(w.endMinute)}`))}`
    : 'Any hour';
  return { days, hours };
}
