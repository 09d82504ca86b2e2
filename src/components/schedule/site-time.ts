/** Dates and times in a site's timezone, with Intl only (the client ships no timezone library). */

const partFormatters = new Map<string, Intl.DateTimeFormat>();

function partsFormatter(timeZone: string): Intl.DateTimeFormat {
  let f = partFormatters.get(timeZone);
  if (!f) {
    f = new Intl.DateTimeFormat('en-CA', { timeZone, year: 'numeric', month: '2-digit', day: '2-digit', hour: '2-digit', minute: '2-digit', second: '2-digit', hourCycle: 'h23' });
    partFormatters.set(timeZone, f);
  }
  return f;
}

/** Wall-clock parts of an instant at the site. */
export function wallClock(ms: number, timeZone: string): { date: string; minute: number; y: number; mo: number; d: number; h: number; mi: number; s: number } {
  const p = Object.fromEntries(partsFormatter(timeZone).formatToParts(new Date(ms)).map((x) => [x.type, x.value]));
  const y = Number(p.year);
  const mo = Number(p.month);
  const d = Number(p.day);
  const h = Number(p.hour) % 24;
  const mi = Number(p.minute);
  const s = Number(p.second);
  return { date: `${p.year}-${p.month}-${p.day}`, minute: h * 60 + mi + s / 60, y, mo, d, h, mi, s };
}

/** Today's date (YYYY-MM-DD) at the site. */
export const siteToday = (timeZone: string, nowMs = Date.now()) => wallClock(nowMs, timeZone).date;

/** The instant of a wall-clock date and time at the site (the first one, in a repeated hour). */
export function siteWallToEpoch(date: string, time: string, timeZone: string): number {
  const [y, mo, d] = date.split('-').map(Number);
  const [h, mi] = time.split(':').map(Number);
  const want = Date.UTC(y, mo - 1, d, h, mi);
  let guess = want;
  for (let i = 0; i < 3; i++) {
    const w = wallClock(guess, timeZone);
    const seen = Date.UTC(w.y, w.mo - 1, w.d, w.h, w.mi);
    if (seen === want) break;
    guess += want - seen;
  }
  return guess;
}

/** Split [start, end) into pieces per site day: { date, from, to } in minutes of that day (0–1440). */
export function piecesByDay(startMs: number, endMs: number, timeZone: string): { date: string; from: number; to: number }[] {
  const out: { date: string; from: number; to: number }[] = [];
  let t = startMs;
  for (let guard = 0; t < endMs && guard < 30; guard++) {
    const w = wallClock(t, timeZone);
    const leftToday = (1440 - w.minute) * 60_000;
    const pieceEnd = Math.min(endMs, t + leftToday);
    out.push({ date: w.date, from: w.minute, to: Math.min(1440, w.minute + (pieceEnd - t) / 60_000) });
    t = pieceEnd;
  }
  return out;
}

/** "04:30" from minutes of the day. */
export function hhmm(minute: number): string {
  const m = Math.round(minute) % 1440;
  return `${String(Math.floor(m / 60)).padStart(2, '0')}:${String(m % 60).padStart(2, '0')}`;
}
