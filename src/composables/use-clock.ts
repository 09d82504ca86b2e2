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
