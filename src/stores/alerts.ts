import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api } from '../services/api-client';
import type { AlertListResponse, AlertLiveEvent, AlertView } from '../types/history';
import type { LiveFrame } from '../types/live';
import { useLiveStore } from './live';

type Counts = AlertListResponse['counts'];
const noCounts = (): Counts => ({ open: 0, acknowledged: 0, openBySeverity: { critical: 0, warning: 0, info: 0 } });

/**
 * The badge counts of alerts over every site the person may see: fetched on start and after
 * each live (re)connect, then kept up to date from the live `alert` frames.
 */
export const useAlertsStore = defineStore('alerts', () => {
  const counts = ref<Counts>(noCounts());
  const loaded = ref(false);
  const listeners = new Set<(e: AlertLiveEvent) => void>();
  let unfollow: (() => void) | null = null;

  async function refresh(): Promise<void> {
    try {
      const res = await api.get<AlertListResponse>('/alerts?state=active&pageSize=1', { quiet: true });
      counts.value = res.counts;
      loaded.value = true;
    } catch {
      // The badge keeps its last counts; the next reconnect tries again.
    }
  }

  /** Move the counts by one alert's change of state (before → after). */
  function shift(before: AlertView['state'] | null, after: AlertView) {
    const c = counts.value;
    if (before === 'open') {
      c.open = Math.max(0, c.open - 1);
      c.openBySeverity[after.severity] = Math.max(0, c.openBySeverity[after.severity] - 1);
    } else if (before === 'acknowledged') c.acknowledged = Math.max(0, c.acknowledged - 1);
    if (after.state === 'open') {
      c.open += 1;
      c.openBySeverity[after.severity] += 1;
    } else if (after.state === 'acknowledged') c.acknowledged += 1;
  }

  function onFrame(f: LiveFrame) {
    if (f.type === 'snapshot') {
      void refresh();
      return;
    }
    if (f.type !== 'alert') return;
    const e = f as unknown as AlertLiveEvent;
    // Raised: new and open. Acknowledged: was open. Resolved: it may have been either; a fetch tells.
    if (e.change === 'raised') shift(null, e.alert);
    else if (e.change === 'acknowledged') shift('open', e.alert);
    else void refresh();
    for (const fn of listeners) fn(e);
  }

  function start() {
    if (unfollow) return;
    unfollow = useLiveStore().onFrames(onFrame);
    void refresh();
  }

  function stop() {
    unfollow?.();
    unfollow = null;
    counts.value = noCounts();
    loaded.value = false;
  }

  /** Pages showing a list follow the same events. */
  function onAlert(fn: (e: AlertLiveEvent) => void): () => void {
    listeners.add(fn);
    return () => listeners.delete(fn);
  }

  const acknowledge = (id: number) => api.post<AlertView>(`/alerts/${id}/acknowledge`);

  return { counts, loaded, start, stop, refresh, onAlert, acknowledge };
});
