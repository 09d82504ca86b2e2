import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api } from '../services/api-client';
import type { LiveFrame } from '../types/live';
import type { Hold, HoldLiveEvent, Run, RunLiveEvent, Timeline, ZoneRunLiveEvent } from '../types/programs';
import { useLiveStore } from './live';

/** How far back "Skipped and why" looks. */
export const SKIPPED_LOOKBACK_DAYS = 7;

/**
 * The open site's schedule: the coming week as planned, the runs of the last days and today
 * (live: run and zone-run events change them in place), and the current hold.
 */
export const useScheduleStore = defineStore('schedule', () => {
  const siteId = ref<number | null>(null);
  const timeline = ref<Timeline | null>(null);
  const runs = ref<Run[]>([]);
  const hold = ref<Hold | null>(null);
  let refetchTimer: ReturnType<typeof setTimeout> | undefined;

  async function loadTimeline(id: number) {
    const t = await api.get<Timeline>(`/sites/${id}/timeline?days=7`, { quiet: true });
    if (siteId.value === id) {
      timeline.value = t;
      hold.value = t.hold;
    }
  }

  async function loadRuns(id: number) {
    const now = Date.now();
    const from = new Date(now - SKIPPED_LOOKBACK_DAYS * 86_400_000).toISOString();
    const to = new Date(now + 36 * 3_600_000).toISOString();
    const res = await api.get<{ items: Run[] }>(`/sites/${id}/runs?from=${encodeURIComponent(from)}&to=${encodeURIComponent(to)}`, { quiet: true });
    if (siteId.value === id) runs.value = res.items;
  }

  async function load(id: number): Promise<void> {
    if (siteId.value !== id) {
      timeline.value = null;
      runs.value = [];
      hold.value = null;
    }
    siteId.value = id;
    await Promise.all([loadTimeline(id), loadRuns(id)]);
  }

  /** Ask again shortly (several events often arrive together). */
  function refetchSoon(what: 'all' | 'runs' = 'all') {
    clearTimeout(refetchTimer);
    refetchTimer = setTimeout(() => {
      const id = siteId.value;
      if (id === null) return;
      void (what === 'all' ? Promise.all([loadTimeline(id), loadRuns(id)]) : loadRuns(id)).catch(() => {});
    }, 300);
  }

  function onRun(e: RunLiveEvent) {
    const r = runs.value.find((x) => x.id === e.runId);
    if (!r) return refetchSoon('runs');
    r.state = e.state;
    r.reason = e.reason;
    // A run that ends or is held carries the final states of its zones; fetch them.
    if (e.state !== 'running') refetchSoon('runs');
  }

  function onZoneRun(e: ZoneRunLiveEvent) {
    const zr = runs.value.find((x) => x.id === e.runId)?.zones.find((z) => z.id === e.zoneRunId);
    if (!zr) return refetchSoon('runs');
    zr.state = e.state;
    zr.reason = e.reason;
    if (e.state === 'running' && !zr.actualStart) zr.actualStart = new Date().toISOString();
    if (e.state !== 'running' && e.state !== 'planned') refetchSoon('runs'); // actual minutes and litres
  }

  function onHold(e: HoldLiveEvent) {
    hold.value = e.kind === 'none' || !e.reason ? null : { kind: e.kind, reason: e.reason, until: e.until ?? null };
    refetchSoon('all');
  }

  function onFrame(f: LiveFrame) {
    if (siteId.value === null) return;
    if (f.type === 'snapshot') return refetchSoon('all'); // back after a gap: we may have missed events
    if (f.siteId !== siteId.value) return;
    if (f.type === 'run') onRun(f as unknown as RunLiveEvent);
    else if (f.type === 'zone_run') onZoneRun(f as unknown as ZoneRunLiveEvent);
    else if (f.type === 'hold') onHold(f as unknown as HoldLiveEvent);
  }

  /** Follow the live events while a schedule page is open; returns the function that stops it. */
  function follow(): () => void {
    return useLiveStore().onFrames(onFrame);
  }

  /** Managers, admins and the site's owners. Throws ApiError (the form shows it). */
  async function setDelay(id: number, body: { hours?: number; until?: string; reason?: string }) {
    const res = await api.post<{ until: string; hold: Hold | null }>(`/sites/${id}/rain-delay`, body, { quiet: true });
    if (siteId.value === id) hold.value = res.hold;
    await loadTimeline(id).catch(() => {});
    return res;
  }

  async function cancelDelay(id: number) {
    // DELETE answers { cancelled, hold } here, though the client types deletes as empty.
    const res = (await api.delete(`/sites/${id}/rain-delay`)) as unknown as { cancelled: number; hold: Hold | null } | undefined;
    if (siteId.value === id) hold.value = res?.hold ?? null;
    await loadTimeline(id).catch(() => {});
    return res;
  }

  return { siteId, timeline, runs, hold, load, loadRuns, follow, setDelay, cancelDelay };
});
