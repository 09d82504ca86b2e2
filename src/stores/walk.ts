import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, ApiError } from '../services/api-client';
import type { LiveFrame } from '../types/live';
import type { Hold, Walk, WalkLiveEvent } from '../types/programs';
import { useLiveStore } from './live';

const key = (siteId: number) => `runnel.walk.${siteId}`;
const POLL_MS = 2500;

/**
 * A walk test at the open site: one zone at a time, driven by the server. The walk id is kept
 * for the browser tab, so a reload comes back to the same walk. Live 'walk' events update it.
 */
export const useWalkStore = defineStore('walk', () => {
  const siteId = ref<number | null>(null);
  const walk = ref<Walk | null>(null);
  const hold = ref<Hold | null>(null);
  /** The step being sent, so its button shows it is busy. */
  const sending = ref<string | null>(null);

  /** Bumped on every change, so a look that crossed a step on the way is dropped. */
  let changes = 0;

  function remember(w: Walk | null) {
    changes++;
    walk.value = w;
    if (siteId.value === null) return;
    if (w && w.state === 'running') sessionStorage.setItem(key(siteId.value), w.id);
    else sessionStorage.removeItem(key(siteId.value));
  }

  /** The site's hold (for the override switch) and a walk left running in this tab. */
  async function load(id: number): Promise<void> {
    if (siteId.value !== id) walk.value = null;
    siteId.value = id;
    const h = await api.get<{ hold: Hold | null }>(`/sites/${id}/hold`, { quiet: true });
    hold.value = h.hold;
    const saved = sessionStorage.getItem(key(id));
    if (saved && !walk.value) {
      try {
        remember(await api.get<Walk>(`/walks/${saved}`, { quiet: true }));
      } catch {
        sessionStorage.removeItem(key(id)); // the server restarted, or the walk is gone
      }
    }
  }

  /** Throws ApiError (409 rain_hold, 400 details). */
  async function start(id: number, body: { zoneIds: number[]; minutes: number; overrideHold: boolean }): Promise<Walk> {
    const w = await api.post<Walk>(`/sites/${id}/walks`, body, { quiet: true });
    siteId.value = id;
    remember(w);
    return w;
  }

  async function step(action: 'next' | 'back' | 'extend' | 'stop', minutes?: number): Promise<void> {
    const w = walk.value;
    if (!w || sending.value) return;
    sending.value = action;
    try {
      remember(await api.post<Walk>(`/walks/${w.id}/step`, minutes ? { action, minutes } : { action }));
    } catch (e) {
      // Finished meanwhile (time ran out on the last zone): show where it ended.
      if (e instanceof ApiError && e.code === 'walk_finished') remember(await api.get<Walk>(`/walks/${w.id}`, { quiet: true }).catch(() => w));
    } finally {
      sending.value = null;
    }
  }

  function onFrame(f: LiveFrame) {
    if (f.type === 'hold' && f.siteId === siteId.value) {
      const e = f as unknown as { kind: string; reason: string | null; until?: string };
      hold.value = e.kind === 'none' || !e.reason ? null : { kind: e.kind as Hold['kind'], reason: e.reason, until: e.until ?? null };
      return;
    }
    if (f.type !== 'walk') return;
    const e = f as unknown as WalkLiveEvent;
    if (walk.value && e.walk.id === walk.value.id) remember(e.walk);
  }

  /**
   * Follow the walk while its page is open: live 'walk' events for each step and outcome, and a
   * look every few seconds for the flow seen, which the server gathers from readings without an event.
   */
  function follow(): () => void {
    const stopLive = useLiveStore().onFrames(onFrame);
    const timer = setInterval(async () => {
      const w = walk.value;
      if (!w || w.state !== 'running' || sending.value) return;
      const seen = changes;
      try {
        const fresh = await api.get<Walk>(`/walks/${w.id}`, { quiet: true });
        if (changes === seen && walk.value?.id === fresh.id && !sending.value) remember(fresh);
      } catch {
        // The next event or look brings it.
      }
    }, POLL_MS);
    return () => {
      stopLive();
      clearInterval(timer);
    };
  }

  /** Back to choosing zones (after a finished walk). */
  function clear() {
    remember(null);
  }

  return { siteId, walk, hold, sending, load, start, step, follow, clear };
});
