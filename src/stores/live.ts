import { defineStore } from 'pinia';
import { reactive, ref } from 'vue';
import { api } from '../services/api-client';
import { createLiveClient, type LiveClient, type LiveConnection } from '../services/live-client';
import type { CommandLiveEvent, LiveFrame, SiteActivity, StartResponse } from '../types/live';
import { applyFrame, emptyLiveState, type OpenValve, type PendingCommand } from './live-state';

export type { LiveController, OpenValve, PendingCommand, QueuedStart } from './live-state';

/** What a zone's valve is doing, as the boards and the dispatcher report it. */
export type ZoneLiveState =
  | { kind: 'open'; valve: OpenValve; closing: boolean }
  | { kind: 'opening'; command: PendingCommand }
  | { kind: 'queued'; position: number; commandId: string }
  | { kind: 'closed' };

export type SiteLiveSummary = {
  controllers: number;
  online: number;
  running: number;
  queued: number;
  rain: boolean;
  /** Newest reading of any controller at the site (ISO), or null. */
  lastReadingAt: string | null;
};

/** Give up showing "Closing…" after this long; the board's failsafe still closes the valve. */
const CLOSING_TIMEOUT_MS = 20_000;
/** An acknowledged start shows "Opening…" this long while its valve event is on the way. */
const ACKED_GRACE_MS = 5_000;
/** Past this, a "sent" start whose outcome we missed (socket down) no longer shows as opening. */
const SENT_STALE_MS = 60_000;

/**
 * The live fleet: a snapshot from /ws, then deltas. Started after sign-in and stopped at
 * sign-out (boot/live.ts). Pages read it; only the server opens and closes valves.
 */
export const useLiveStore = defineStore('live', () => {
  const state = reactive(emptyLiveState());
  const connection = ref<LiveConnection>('off');
  /** Server clock minus ours, from the last snapshot; timers on screen count in server time. */
  const clockOffsetMs = ref(0);
  const snapshotAt = ref<string | null>(null);
  /** Zones asked to close (zone id → when), until the board reports them closed. */
  const closing = reactive<Record<number, number>>({});
  /** Words for our own commands' notices (command id → zone name). */
  const labels = new Map<string, string>();
  const commandListeners = new Set<(e: CommandLiveEvent) => void>();
  /** Pages that follow other kinds of frames (runs, holds, walks), and every snapshot. */
  const frameListeners = new Set<(f: LiveFrame) => void>();
  const activityTimers = new Map<number, ReturnType<typeof setTimeout>>();
  let client: LiveClient | null = null;

  /** Let the API client decide: a 401 here sends the user to sign in. */
  const checkSession = () => void api.get('/auth/me', { quiet: true }).catch(() => {});

  function onFrame(f: LiveFrame) {
    const now = Date.now();
    for (const fn of frameListeners) {
      try {
        fn(f);
      } catch {
        // A page's listener must not stop the live picture.
      }
    }
    if (!applyFrame(state, f, now)) return;
    if (f.type === 'snapshot') {
      snapshotAt.value = f.at as string;
      const at = Date.parse(String(f.at));
      if (Number.isFinite(at)) clockOffsetMs.value = at - now;
      for (const z of Object.keys(closing)) if (!state.valves[Number(z)]) delete closing[Number(z)];
    } else if (f.type === 'valve' && f.open === false && typeof f.zoneId === 'number') {
      delete closing[f.zoneId];
    } else if (f.type === 'command') {
      const e = f as unknown as CommandLiveEvent;
      if (e.state === 'acked') refreshActivitySoon(e.siteId);
      for (const fn of commandListeners) fn(e);
    }
  }

  function start() {
    if (client) return;
    client = createLiveClient({
      onFrame,
      onConnection: (s) => (connection.value = s),
      onSignedOut: checkSession,
      onRepeatedFailure: checkSession,
    });
    client.start();
  }

  function stop() {
    client?.stop();
    client = null;
    connection.value = 'off';
    Object.assign(state, emptyLiveState());
    for (const z of Object.keys(closing)) delete closing[Number(z)];
    for (const t of activityTimers.values()) clearTimeout(t);
    activityTimers.clear();
    labels.clear();
    snapshotAt.value = null;
  }

  const resync = () => client?.resync();

  /** The exact planned end comes from the dispatcher once the board has acknowledged. */
  function refreshActivitySoon(siteId: number) {
    if (activityTimers.has(siteId)) return;
    activityTimers.set(
      siteId,
      setTimeout(async () => {
        activityTimers.delete(siteId);
        try {
          const a = await api.get<SiteActivity>(`/sites/${siteId}/activity`, { quiet: true });
          for (const x of a.active) {
            if (!x.plannedEnd) continue;
            state.plannedHints[x.zoneId] = x.plannedEnd;
            const v = state.valves[x.zoneId];
            if (v) v.plannedEnd = x.plannedEnd;
          }
        } catch {
          // The estimate stays; the next snapshot corrects it.
        }
      }, 250),
    );
  }

  /** Remember a start we sent, so its row shows "Opening…" and its notices can name the zone. */
  function noteStart(r: StartResponse, siteId: number, controllerId: number, zoneName: string, userId: number | null) {
    labels.set(r.commandId, zoneName);
    const known = state.commands[r.commandId];
    state.commands[r.commandId] = {
      commandId: r.commandId, siteId, zoneId: r.zoneId, controllerId,
      // An event may have overtaken the HTTP answer: events are the newer word.
      state: known?.state ?? r.state,
      message: known?.message ?? null, userId, seconds: r.minutes * 60, updatedAt: Date.now(),
    };
    const q = state.queue.find((x) => x.commandId === r.commandId);
    if (q) q.seconds = r.minutes * 60;
  }

  function markClosing(zoneId: number, on = true) {
    if (!on) {
      delete closing[zoneId];
      return;
    }
    const at = Date.now();
    closing[zoneId] = at;
    setTimeout(() => {
      if (closing[zoneId] === at) delete closing[zoneId];
    }, CLOSING_TIMEOUT_MS);
  }

  function onCommand(fn: (e: CommandLiveEvent) => void): () => void {
    commandListeners.add(fn);
    return () => commandListeners.delete(fn);
  }

  /** Follow every frame from /ws (snapshots included, so a page can refetch after a reconnect). */
  function onFrames(fn: (f: LiveFrame) => void): () => void {
    frameListeners.add(fn);
    return () => frameListeners.delete(fn);
  }

  const labelOf = (commandId: string) => labels.get(commandId);

  function queuePosition(zoneId: number): { position: number; commandId: string } | null {
    const q = state.queue.find((x) => x.zoneId === zoneId);
    if (!q) return null;
    const position = state.queue.filter((x) => x.siteId === q.siteId).indexOf(q) + 1;
    return { position, commandId: q.commandId };
  }

  function zoneState(zoneId: number): ZoneLiveState {
    const valve = state.valves[zoneId];
    if (valve) return { kind: 'open', valve, closing: zoneId in closing };
    const q = queuePosition(zoneId);
    if (q) return { kind: 'queued', ...q };
    // Sent, or acknowledged a moment ago and the board's valve report is still on its way.
    const now = Date.now();
    const command = Object.values(state.commands).find(
      (c) =>
        c.zoneId === zoneId &&
        ((c.state === 'sent' && now - c.updatedAt < SENT_STALE_MS) || (c.state === 'acked' && now - c.updatedAt < ACKED_GRACE_MS)),
    );
    if (command) return { kind: 'opening', command };
    return { kind: 'closed' };
  }

  function siteSummary(siteId: number): SiteLiveSummary | null {
    if (!state.sites[siteId]) return null;
    const cs = Object.values(state.controllers).filter((c) => c.siteId === siteId);
    let lastReadingAt: string | null = null;
    for (const c of cs) {
      const at = c.latest?.at;
      if (at && (!lastReadingAt || Date.parse(at) > Date.parse(lastReadingAt))) lastReadingAt = at;
    }
    return {
      controllers: cs.length,
      online: cs.filter((c) => c.online).length,
      running: Object.values(state.valves).filter((v) => v.siteId === siteId).length,
      queued: state.queue.filter((q) => q.siteId === siteId).length,
      rain: cs.some((c) => c.rain),
      lastReadingAt,
    };
  }

  /** An open relay that has no zone (the master valve) on a controller. */
  const openRelay = (controllerId: number, relay: number) => state.otherRelays[`${controllerId}:${relay}`] ?? null;

  /** "Now" on the server's clock. */
  const serverNow = (clientNow: number) => clientNow + clockOffsetMs.value;

  return {
    state, connection, clockOffsetMs, snapshotAt, closing,
    start, stop, resync, noteStart, markClosing, onCommand, onFrames, labelOf,
    zoneState, queuePosition, siteSummary, openRelay, serverNow,
  };
});
