import { onScopeDispose, ref } from 'vue';

/** One shared ticking "now" for every clock on screen. */
const now = ref(Date.now());
let users = 0;
let timer: ReturnType<typeof setInterval> | null = null;

export function useClock() {
  users += 1;
  if (!timer) timer = setInterval(() => (now.value = Date.now()), 1000);
  onScopeDispose(() => {
    users -= 1;
    if (users === 0 && timer) {
      clearInterval(timer);
      timer = null;
    }
  });
  return now;
}

const formatters = new Map<string, Intl.DateTimeFormat>();

/** Local time in an IANA timezone, e.g. "Tue 14:05". */
export function localTime(epochMs: number, timeZone: string): string {
  let f = formatters.get(timeZone);
  if (!f) {
    try {
      f = new Intl.DateTimeFormat(undefined, { timeZone, weekday: 'short', hour: '2-digit', minute: '2-digit', hour12: false });
    } catch {
      return '—';
    }
    formatters.set(timeZone, f);
  }
  return f.format(epochMs);
}

const rtfs = {
  long: new Intl.RelativeTimeFormat(undefined, { numeric: 'auto' }),
  short: new Intl.RelativeTimeFormat(undefined, { numeric: 'auto', style: 'short' }),
};

/** "12 seconds ago", "3 minutes ago", "in 2 hours" (or "12 sec. ago" in the short style). */
export function ago(iso: string | number, nowMs: number, style: 'long' | 'short' = 'long'): string {
  const rtf = rtfs[style];
  const t = typeof iso === 'number' ? iso : new Date(iso).getTime();
  let s = Math.round((t - nowMs) / 1000);
  // the page's clock ticks once a second: a reading that arrived since the last tick is "now", not "in 1 sec."
  if (s > 0 && s < 5) s = 0;
  const a = Math.abs(s);
  if (a < 60) return rtf.format(s, 'second');
  if (a < 3600) return rtf.format(Math.round(s / 60), 'minute');
  if (a < 86400) return rtf.format(Math.round(s / 3600), 'hour');
  return rtf.format(Math.round(s / 86400), 'day');
}

/** A running time as a stopwatch shows it: "0:42", "12:05", "1:02:05". */
export function stopwatch(ms: number): string {
  const total = Math.max(0, Math.floor(ms / 1000));
  const h = Math.floor(total / 3600);
  const m = Math.floor((total % 3600) / 60);
  const s = String(total % 60).padStart(2, '0');
  return h ? `${h}:${String(m).padStart(2, '0')}:${s}` : `${m}:${s}`;
}
